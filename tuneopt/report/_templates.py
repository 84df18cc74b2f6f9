"""HTML templates of the reports (Jinja2, autoescaped). Everything inline: no outside files."""

from __future__ import annotations

STYLE = """
:root { --ink: #1d1d1f; --mute: #5b5b60; --line: #d0d0d6; --warn: #8a4b00; --mark: #eef4fb; }
* { box-sizing: border-box; }
body { font-family: "DejaVu Sans", "Liberation Sans", Arial, sans-serif; color: var(--ink);
       margin: 0 auto; max-width: 1150px; padding: 1.2rem 1.5rem 3rem; line-height: 1.4; }
h1 { font-size: 1.6rem; margin: 0 0 .3rem; }
h2 { font-size: 1.25rem; border-bottom: 2px solid var(--ink); padding-bottom: .2rem;
     margin-top: 2.2rem; }
h3 { font-size: 1.05rem; margin: 1.4rem 0 .4rem; }
p.lead, .note { color: var(--mute); }
.note { font-size: .88rem; }
table { border-collapse: collapse; margin: .6rem 0; font-size: .9rem; }
th, td { border: 1px solid var(--line); padding: .25rem .55rem; vertical-align: top; }
th { background: #f4f4f6; text-align: left; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
tr.changed td { background: var(--mark); font-weight: 600; }
.cautions { border: 2px solid var(--warn); background: #fff8ef; padding: .6rem 1rem;
            margin: 1rem 0; }
.cautions h2 { border: 0; margin: 0 0 .3rem; font-size: 1.05rem; color: var(--warn); }
.cautions ul { margin: 0; padding-left: 1.2rem; }
.findings li { color: var(--warn); }
figure { margin: .8rem 0 1.2rem; }
figure svg { max-width: 100%; height: auto; display: block; }
figcaption { font-size: .88rem; color: var(--mute); margin-top: .2rem; }
.cols { display: flex; gap: 2rem; flex-wrap: wrap; }
dl.inputs { columns: 2; column-gap: 2rem; font-size: .82rem; margin: 0; }
dl.inputs div { break-inside: avoid; display: flex; gap: .6rem;
                border-bottom: 1px dotted var(--line); }
dl.inputs dt { color: var(--mute); flex: 1; }
dl.inputs dd { margin: 0; text-align: right; font-variant-numeric: tabular-nums; }
@page { size: A4; margin: 14mm; }
@media print {
  body { max-width: none; padding: 0; font-size: 10pt; }
  section, figure, table, .cautions { break-inside: avoid; }
  h2 { break-after: avoid; }
  section.page { break-before: page; }
  a { color: inherit; text-decoration: none; }
}
"""

BASE = """<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<meta name="generator" content="tuneopt">
<title>{{ title }}</title>
<style>{{ style }}</style>
</head>
<body>
{% block body %}{% endblock %}
</body>
</html>
"""

CAUTIONS = """
<section class="cautions" id="cautions">
<h2>Before you ride</h2>
<ul>{% for c in cautions %}<li>{{ c }}</li>{% endfor %}</ul>
</section>
"""

RUN = (
    """{% extends "base" %}{% block body %}
<header>
<h1>{{ title }}</h1>
<p class="lead">{{ r.description }}<br>
{{ r.trials_line }}</p>
</header>

<section id="summary">
<h2>Recommendation</h2>
{% if r.recommendation %}
<p>{{ r.headline }}</p>
{% if r.fresh_terrain %}<ul id="fresh-terrain">{% for line in r.fresh_terrain %}<li>{{ line }}</li>
{% endfor %}</ul>{% endif %}
<table class="settings" id="recommended-settings">
<tr><th>setting</th><th>now</th><th>recommended (#1)</th><th>note</th></tr>
{% for row in r.recommendation %}
<tr class="{{ 'changed' if row.changed else '' }}" data-key="{{ row.key }}">
<td>{{ row.label }}</td><td class="num">{{ row.now }}</td>
<td class="num recommended">{{ row.recommended }}</td><td class="note">{{ row.note }}</td></tr>
{% endfor %}
</table>
<p class="note">Highlighted rows differ from the current setup. Settings the search did not
move (tyre pressures and anything fixed in the scenario) stay as they are.</p>
<h3>What changes on the trail</h3>
<table id="headline-metrics">
<tr><th>metric</th><th>now</th><th>recommended</th><th>change</th></tr>
{% for m in r.headline_metrics %}
<tr><td>{{ m.label }}</td><td class="num">{{ m.now }}</td><td class="num">{{ m.recommended }}</td>
<td class="num">{{ m.change }}</td></tr>
{% endfor %}
</table>
{% else %}
<p><strong>No ridable setup was found: nothing to recommend.</strong> Widen the search ranges
or check the static check below.</p>
{% endif %}
</section>
"""
    + CAUTIONS
    + """
<section id="ranking">
<h2>Ranked setups</h2>
<table id="ranked-table">
<tr>{% for h in r.table_headers %}<th>{{ h }}</th>{% endfor %}</tr>
{% for row in r.table_rows %}
<tr>{% for cell in row %}{% if loop.first %}<th>{{ cell }}</th>
{% else %}<td class="num">{{ cell }}</td>{% endif %}{% endfor %}</tr>
{% endfor %}
</table>
<p class="note">Score: lower is better. "vs now" is the relative change against the current
setup; "score rise one step either side" is the worst score rise when any one setting moves one
step (a small number means the setup is forgiving of a click or a pump reading).</p>
{% if r.tradeoffs %}<ul id="tradeoff-sentences">{% for t in r.tradeoffs %}<li>{{ t }}</li>
{% endfor %}</ul>{% endif %}
</section>

<section id="tradeoffs">
<h2>Trade-offs</h2>
{% if figures.tradeoff %}
<figure>{{ figures.tradeoff }}
<figcaption>{{ r.tradeoff_caption }}</figcaption></figure>
{% else %}<p class="note">No trials to plot.</p>{% endif %}
</section>

{% if r.ride_labels %}
<section id="rides" class="page">
<h2>On the trail: {{ r.ride_labels | join(" against ") }}</h2>
<p class="note">{{ r.ride_note }}</p>
<figure id="tyre-loads">{{ figures.tyre_loads }}
<figcaption>Tyre load over a representative stretch (the window whose load variation is the
median of the segment's). Shaded: time a tyre carries under {{ r.unloaded_percent }} % of its
static load.</figcaption></figure>
<figure id="travel">{{ figures.travel }}
<figcaption>Where in its travel each wheel spends its time over the whole course. The red zone
is past full travel (the bottom-out bumper).</figcaption></figure>
{% if figures.braking %}
<figure id="braking">{{ figures.braking }}
<figcaption>Pitch and fork dive through the course's longest braking zone (shaded).
</figcaption></figure>
{% endif %}
<figure id="load-split">{{ figures.load_split }}
<figcaption>The front tyre's share of the summed tyre loads, over the whole ride and in the
braking and cornering phases (time in each phase below its name).</figcaption></figure>
</section>
{% endif %}

<section id="static-check">
<h2>Static check</h2>
<table id="static-table">
<tr>{% for h in r.static_headers %}<th>{{ h }}</th>{% endfor %}</tr>
{% for row in r.static_rows %}
<tr>{% for cell in row %}{% if loop.first %}<th>{{ cell }}</th>
{% else %}<td class="num">{{ cell }}</td>{% endif %}{% endfor %}</tr>
{% endfor %}
</table>
{% if r.findings %}<ul class="findings">{% for f in r.findings %}<li>{{ f }}</li>
{% endfor %}</ul>{% endif %}
</section>

<section id="inputs" class="page">
<h2>Inputs</h2>
<p class="note">As the run read them, in SI units: lengths m, masses kg, pressures Pa (gauge),
spring rates N/m, damping N·s/m, volumes m³, angles degrees.</p>
<dl class="inputs">{% for k, v in r.inputs %}<div><dt>{{ k }}</dt><dd>{{ v }}</dd></div>
{% endfor %}</dl>
{% if files %}
<h3>Files</h3>
<p class="note">Next to this report, in the run folder:</p>
<ul id="exports">{% for e in files %}<li>
{% if e.endswith(".html") %}<a href="{{ e }}">{{ e }}</a>{% else %}{{ e }}{% endif %}</li>
{% endfor %}</ul>
{% endif %}
</section>
{% endblock %}
"""
)


def render(name: str, **context: object) -> str:
    """Render template ``name`` ("run") with the shared style. The comparison page has its
    own template (tuneopt.report.comparison) on the same base and style."""
    import jinja2

    env = jinja2.Environment(
        loader=jinja2.DictLoader({"base": BASE, "run": RUN}),
        autoescape=True,
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
    )
    return env.get_template(name).render(style=STYLE, cautions=context.pop("cautions"), **context)
