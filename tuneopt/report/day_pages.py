"""HTML of the pages a tuner prints and takes to the trail: the test-day plan and the setup
sheet. A4 pages with print CSS, everything inline (no outside requests), the project's shared
style and caution block."""

from __future__ import annotations

from typing import Any

from tuneopt.report._templates import BASE, CAUTIONS, STYLE

__all__ = ["render_day_page"]

DAY_STYLE = """
body { max-width: 800px; }
ol.trials { list-style: none; padding: 0; margin: 0; }
ol.trials > li { border: 1px solid var(--ink); padding: .45rem .7rem; margin: .5rem 0;
                 break-inside: avoid; }
.trial-head { font-weight: 600; }
.trial-head .num { display: inline-block; min-width: 1.8rem; }
.pred, .feel, .back { margin: .15rem 0 0 1.8rem; font-size: .9rem; }
.pred ul { margin: .1rem 0; padding-left: 1.2rem; }
.noise { color: var(--mute); }
.verdict { margin: .35rem 0 0 1.8rem; border: 1.5px dashed var(--mute); min-height: 2.6rem;
           padding: .15rem .4rem; font-size: .78rem; color: var(--mute); }
dl.dial { margin: .3rem 0; display: grid; grid-template-columns: max-content auto;
          gap: .1rem 1.2rem; font-size: .95rem; }
dl.dial dt { color: var(--mute); }
dl.dial dd { margin: 0; font-weight: 600; font-variant-numeric: tabular-nums; }
dl.dial dd .was { font-weight: 400; color: var(--mute); }
.blank { display: inline-block; min-width: 7rem; border-bottom: 1px solid var(--ink); }
section.sheet + section.sheet { break-before: page; }
.end-block { border-left: 4px solid var(--ink); padding: .1rem .8rem; margin: .6rem 0; }
.end-block h3 { margin: .2rem 0; }
ul.facts { list-style: none; padding: 0; margin: .2rem 0; font-size: .92rem; }
@media print { body { font-size: 9.5pt; } .verdict { min-height: 2.2rem; } }
"""

TEST_DAY = (
    """{% extends "base" %}{% block body %}
<header>
<h1>{{ p.title }}</h1>
<p class="lead">{{ p.lead }}</p>
</header>
"""
    + CAUTIONS
    + """
<section id="baseline">
<h2>Baseline to set before riding</h2>
<dl class="dial">{% for d in p.baseline %}
<dt>{{ d.label }}</dt><dd data-key="{{ d.key }}">{{ d.value }}{% if d.now %}
 <span class="was">(now {{ d.now }})</span>{% endif %}</dd>{% endfor %}
</dl>
<h3>Sag to check with a tape</h3>
<ul class="facts" id="sag">{% for s in p.sag %}<li>{{ s }}</li>{% endfor %}</ul>
{% if p.notes %}<ul class="findings">{% for n in p.notes %}<li>{{ n }}</li>{% endfor %}</ul>
{% endif %}
</section>

<section id="trials">
<h2>Trial changes, one at a time</h2>
{% set ns = namespace(kind="") %}
{% for t in p.trials %}
{% if t.kind != ns.kind %}{% if ns.kind %}</ol>{% endif %}{% set ns.kind = t.kind %}
<h3>{{ p.kind_words[t.kind] | capitalize }}</h3>
<ol class="trials">{% endif %}
<li data-key="{{ t.key }}" data-kind="{{ t.kind }}">
<div class="trial-head"><span class="num">{{ t.order }}.</span>{{ t.label }}:
{{ t.baseline }} &rarr; {{ t.trial }} <span class="noise">({{ t.change }})</span></div>
<div class="pred">Predicted: {{ t.prediction }}
{% if t.metrics %}<ul>{% for m in t.metrics %}<li>{{ m }}</li>{% endfor %}</ul>{% endif %}
</div>
<div class="feel">Feel for: {{ t.feel }}</div>
<div class="back">Then go back to: <strong>{{ t.baseline }}</strong></div>
<div class="verdict">rider's verdict</div>
</li>
{% if loop.last %}</ol>{% endif %}
{% endfor %}
{% if p.not_tried %}<h3>Not proposed</h3>
<ul class="facts">{% for n in p.not_tried %}<li>{{ n }}</li>{% endfor %}</ul>{% endif %}
</section>

<section id="chosen">
<h2>Settings chosen at the end of the day</h2>
<dl class="dial">{% for d in p.baseline %}
<dt>{{ d.label }}</dt><dd><span class="blank"></span></dd>{% endfor %}
</dl>
<p class="note">Write them into the settings file next to this page (it starts as the baseline)
and run <code>tuneopt testday STUDY_DIR --chosen FILE</code>: it writes the scenario with these
as its current setup, ready for the next study.</p>
</section>
{% endblock %}
"""
)

SHEET = (
    """{% extends "base" %}{% block body %}
{% for s in sheets %}
<section class="sheet" id="sheet-{{ s.rank }}">
<h1>{{ s.title }}</h1>
<p class="lead">{{ s.lead }}</p>
<ul class="facts">{% for k, v in s.facts %}<li><strong>{{ k }}:</strong> {{ v }}</li>
{% endfor %}</ul>
{% for end in s.ends %}
<div class="end-block" data-end="{{ end.name }}">
<h3>{{ end.title }}</h3>
<dl class="dial">{% for d in end.settings %}
<dt>{{ d.label }}</dt><dd data-key="{{ d.key }}">{{ d.value }}{% if d.now %}
 <span class="was">(now {{ d.now }})</span>{% endif %}</dd>{% endfor %}
</dl>
{% if end.sag %}<p class="sag">Sag to check with a tape: {{ end.sag }}</p>{% endif %}
</div>
{% endfor %}
<p class="note">{{ s.how }}</p>
{% if s.notes %}<ul class="findings">{% for n in s.notes %}<li>{{ n }}</li>{% endfor %}</ul>
{% endif %}
<section class="cautions"><h2>Before you ride</h2>
<ul>{% for c in cautions %}<li>{{ c }}</li>{% endfor %}</ul></section>
</section>
{% endfor %}
{% endblock %}
"""
)


def render_day_page(name: str, title: str, cautions: list[str], **context: Any) -> str:
    """Render ``name`` ("testday" or "sheet") with the shared style and the cautions."""
    import jinja2

    env = jinja2.Environment(
        loader=jinja2.DictLoader({"base": BASE, "testday": TEST_DAY, "sheet": SHEET}),
        autoescape=True,
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
    )
    from markupsafe import Markup

    # our own constant style: not escaped (autoescape would turn its quotes into entities)
    style = Markup(STYLE + DAY_STYLE)  # noqa: S704
    return env.get_template(name).render(style=style, title=title, cautions=cautions, **context)
