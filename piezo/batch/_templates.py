"""Jinja2 templates of the batch pages (rendered with autoescape on).

Kept as Python strings so they ship inside the package without package-data settings.
"""

from __future__ import annotations

_STYLE = """
<style>
 body { font-family: system-ui, sans-serif; margin: 1.5em auto; max-width: 60em; color: #222; }
 h1 { font-size: 1.4em; } h2 { font-size: 1.15em; margin-top: 1.6em; }
 table { border-collapse: collapse; margin: 0.5em 0; }
 th, td { border: 1px solid #ccc; padding: 0.25em 0.6em; text-align: left; }
 td.num { text-align: right; font-variant-numeric: tabular-nums; }
 .pass { color: #1b6e20; } .warn { color: #8a6100; }
 .fail, .not-evaluable { color: #a01010; font-weight: bold; }
 .note { font-size: 0.9em; color: #555; }
 code { font-size: 0.95em; }
</style>
"""

SUMMARY_TEMPLATE = (
    """<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<title>Batch summary: {{ spec.name or "lot" }}</title>"""
    + _STYLE
    + """</head><body>
{% macro file_link(r) -%}
{% if reports.get(r.file) %}<a href="{{ reports[r.file] }}">{{ r.file }}</a>
{%- else %}{{ r.file }}{% endif %}
{%- endmacro %}
{% macro messages(items) -%}
{% for msg in items %}{{ msg }}{% if not loop.last %}<br>{% endif %}{% endfor %}
{%- endmacro %}
<h1>Batch summary: {{ spec.name or "lot" }}</h1>
<p class="note">piezo {{ version }} · spec hash <code>{{ spec.sha256[:16] }}</code>
 · stimulus: {{ spec.stimulus.kind }}</p>

<h2>Yield</h2>
<p>{{ summary.captures }} captures;
 yield (pass + warn over all captures):
 <strong>{% if summary.yield is none %}—{% else -%}
 {{ "%.1f"|format(100 * summary.yield) }} %{% endif %}</strong></p>
<table><tr><th>verdict</th><th>captures</th></tr>
{% for v in verdicts %}<tr><td class="{{ v|replace(' ', '-') }}">{{ v }}</td>
<td class="num">{{ summary.counts[v] }}</td></tr>
{% endfor %}</table>

<h2>Metrics</h2>
<table><tr><th>metric</th><th>unit</th><th>lower</th><th>upper</th><th>n</th>
<th>far outliers</th><th>mean</th><th>σ</th><th>Cp</th><th>Cpk</th></tr>
{% for m in summary.metrics %}<tr><td>{{ m.name }}</td><td>{{ m.unit }}</td>
<td class="num">{{ m.lower|num }}</td><td class="num">{{ m.upper|num }}</td>
<td class="num">{{ m.n }}</td><td class="num">{{ m.outliers }}</td>
<td class="num">{{ m.mean|num }}</td>
<td class="num">{{ m.std|num }}</td>
<td class="num">{% if m.two_sided %}{{ m.cp|num(3) }}{% else %}—{% endif %}</td>
<td class="num">{{ m.cpk|num(3) }}</td></tr>
{% endfor %}</table>
<p class="note">Cp = (USL − LSL)/(6σ) for two-sided limits; Cpk = min(USL − μ, μ − LSL)/(3σ),
 the one available side for one-sided limits (NIST/SEMATECH e-Handbook of Statistical
 Methods, 6.1.6). Capability assumes a process in statistical control: μ and σ (sample
 standard deviation) are taken over the n evaluated captures less the far outliers
 (beyond the quartiles ∓ 3 IQR, Tukey; special causes such as a clipped capture), which
 are counted apart and still appear in the histograms. Limits: the innermost "fail"
 limits ("warn" limits for a metric that has no other). Masks are shown as their worst
 margin in dB (limit: 0 dB).</p>

{% for m in summary.metrics %}{% if m.png %}
<h3>{{ m.name }} ({{ m.unit }})</h3>
<img alt="histogram of {{ m.name }} with its limits" src="data:image/png;base64,{{ m.png }}">
{% endif %}{% endfor %}

<h2>Failing and not evaluable units</h2>
{% if bad %}<table><tr><th>file</th><th>serial</th><th>verdict</th><th>why</th></tr>
{% for r in bad %}<tr>
<td>{{ file_link(r) }}</td>
<td>{{ r.serial }}</td><td class="{{ r.verdict|replace(' ', '-') }}">{{ r.verdict }}</td>
<td>{{ messages(r.failed_limits + r.not_evaluable) }}</td>
</tr>{% endfor %}</table>
{% else %}<p>None.</p>{% endif %}

{% if warned %}<h2>Units with warnings</h2>
<table><tr><th>file</th><th>serial</th><th>warnings</th></tr>
{% for r in warned %}<tr>
<td>{{ file_link(r) }}</td>
<td>{{ r.serial }}</td><td>{{ messages(r.warnings) }}</td>
</tr>{% endfor %}</table>{% endif %}

<p class="note">Handling: a piezoelectric element produces high voltages when it is
 struck, squeezed or heated; short its terminals before handling units and fixtures.
 Limits derived from a few golden units are uncertain; a pass is a pass against this
 spec only.</p>
</body></html>
"""
)

CAPTURE_TEMPLATE = (
    """<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<title>Capture report: {{ row.file }}</title>"""
    + _STYLE
    + """</head><body>
<h1>Capture {{ row.file }}</h1>
<p>Serial: {{ row.serial or "—" }} · verdict:
 <span class="{{ row.verdict|replace(' ', '-') }}">{{ row.verdict }}</span></p>
<p class="note">spec: {{ spec.name or "—" }} (hash <code>{{ spec.sha256[:16] }}</code>) ·
 content hash <code>{{ row.content_sha256[:16] }}</code> · piezo {{ version }}</p>
{% if row.error %}<p class="fail">{{ row.error }}</p>{% endif %}
{% if png %}<img alt="measured response of {{ row.file }}" src="data:image/png;base64,{{ png }}">
{% endif %}
<table><tr><th>metric</th><th>value</th><th>unit</th><th>limits</th><th>margin</th></tr>
{% for line in lines %}<tr><td>{{ line.metric.name }}</td>
<td class="num">{{ line.value|num(6) }}</td><td>{{ line.metric.unit }}</td>
<td>{{ line.limits|join("; ") }}</td><td class="num">{{ line.margin|num(3) }}</td></tr>
{% endfor %}</table>
{% for title, items in [("Failed limits", row.failed_limits), ("Warnings", row.warnings),
 ("Not evaluable", row.not_evaluable)] %}{% if items %}<h2>{{ title }}</h2>
<ul>{% for msg in items %}<li>{{ msg }}</li>{% endfor %}</ul>{% endif %}{% endfor %}
</body></html>
"""
)
