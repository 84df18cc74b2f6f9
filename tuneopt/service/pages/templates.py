"""The shop pages' templates (Jinja2, autoescaped): a layout of our own on the reports' style,
everything inline (no outside fonts, scripts or styles), so the pages work with no network."""

from __future__ import annotations

from typing import Any

from tuneopt.report import CAUTIONS, STYLE

__all__ = ["render_page"]

PAGE_STYLE = """
nav.top { display: flex; gap: 1.2rem; align-items: baseline; border-bottom: 1px solid var(--line);
          padding-bottom: .5rem; margin-bottom: 1rem; }
nav.top .name { font-weight: 700; margin-right: auto; }
nav.top form { margin: 0; }
button, .button { font: inherit; padding: .35rem .9rem; border: 1px solid var(--ink);
                  background: #fff; color: var(--ink); cursor: pointer; text-decoration: none;
                  border-radius: 3px; }
button.main { background: var(--ink); color: #fff; }
button.stop { border-color: var(--warn); color: var(--warn); }
form.plain button { border: 0; padding: 0; text-decoration: underline; color: #0645ad; }
ul.jobs { list-style: none; padding: 0; margin: 0; }
ul.jobs li { border: 1px solid var(--line); border-left: 6px solid var(--line);
             padding: .5rem .8rem; margin: 0 0 .6rem; }
ul.jobs li.running, ul.jobs li.finishing { border-left-color: #2f6fb2; }
ul.jobs li.done { border-left-color: #3b7d3b; }
ul.jobs li.failed, ul.jobs li.cancelled { border-left-color: var(--warn); }
.what { font-weight: 600; }
.state { text-transform: uppercase; font-size: .78rem; letter-spacing: .05em; color: var(--mute); }
progress { width: 14rem; height: .8rem; vertical-align: middle; }
.facts { color: var(--mute); font-size: .9rem; }
fieldset { border: 1px solid var(--line); margin: 0 0 1rem; padding: .6rem 1rem 1rem; }
legend { font-weight: 600; padding: 0 .3rem; }
label { display: block; margin: .6rem 0 .2rem; }
input[type=text], input[type=password], input[type=number] { font: inherit; padding: .3rem;
       width: 18rem; max-width: 100%; }
.hint { color: var(--mute); font-size: .85rem; margin: .15rem 0 0; }
.problems { border: 2px solid var(--warn); padding: .5rem 1rem; margin: 0 0 1rem; }
.problems li { color: var(--warn); }
dl.status { display: grid; grid-template-columns: max-content 1fr; gap: .3rem 1.2rem; }
dl.status dt { color: var(--mute); }
dl.status dd { margin: 0; }
ol.ranked li { margin: 0 0 .5rem; }
"""

LAYOUT = """<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
{% if refresh %}<meta http-equiv="refresh" content="{{ refresh }}">{% endif %}
<title>{{ title }}</title>
<style>{{ style }}</style>
</head>
<body>
<nav class="top">
<span class="name">tuneopt jobs</span>
<a href="{{ base }}/">Jobs</a>
<a href="{{ base }}/new">New job</a>
{% if signed_in %}
<form class="plain" method="post" action="{{ base }}/logout">
<button type="submit">Log out</button></form>
{% endif %}
</nav>
{% block body %}{% endblock %}
</body>
</html>
"""

LOGIN = """{% extends "layout" %}{% block body %}
<h1>Log in</h1>
<p class="lead">This service is guarded by its API key. Enter it once; this browser then stays
logged in for {{ hours }} hours (or until you log out).</p>
{% if problem %}<div class="problems"><ul><li>{{ problem }}</li></ul></div>{% endif %}
<form method="post" action="{{ base }}/login">
<label for="key">API key</label>
<input type="password" id="key" name="key" autocomplete="current-password" required autofocus>
<p><button class="main" type="submit">Log in</button></p>
</form>
{% endblock %}
"""

JOBS = """{% extends "layout" %}{% block body %}
<h1>Jobs</h1>
<p class="lead">{% if refresh %}This list updates itself every {{ refresh }} seconds while a job
runs.{% else %}No job is running.{% endif %} <a href="{{ base }}/new">Start a new job</a>.</p>
{% if not jobs %}<p>No jobs yet.</p>{% endif %}
<ul class="jobs">
{% for j in jobs %}
<li class="{{ j.state }}" data-job="{{ j.id }}">
<div><a class="what" href="{{ base }}/jobs/{{ j.id }}">{{ j.scenario }}</a>
<span class="state">{{ j.state_text }}</span></div>
<div><progress max="{{ j.bar_max }}" value="{{ j.bar_value }}"></progress>
<span class="trials">{{ j.trials }}</span>
{% if j.best %}&middot; best search score <span class="best">{{ j.best }}</span>{% endif %}
{% if j.left %}&middot; <span class="left">{{ j.left }}</span>{% endif %}</div>
<div class="facts">submitted {{ j.submitted }}
{% if j.deadline %} &middot; {{ j.deadline }}{% endif %}</div>
</li>
{% endfor %}
</ul>
{% endblock %}
"""

NEW = """{% extends "layout" %}{% block body %}
<h1>New job</h1>
<p class="lead">Send a scenario file with the files it names, set a budget, and come back to
the jobs list for its progress.</p>
{% if problems %}<div class="problems"><p>The job was not started:</p><ul>
{% for field, message in problems %}<li><strong>{{ field }}</strong>: {{ message }}</li>{% endfor %}
</ul></div>{% endif %}
<div class="problems" id="too_large" hidden><p>The job was not started:</p><ul>
<li><strong></strong><span></span></li></ul></div>
<form method="post" action="{{ base }}/new" enctype="multipart/form-data">
<input type="hidden" name="token" value="{{ token }}">
<input type="hidden" name="tz_offset" id="tz_offset" value="">
<fieldset><legend>Scenario</legend>
<label for="scenario">Scenario file (.toml or .json), or its folder as a .zip or .tar.gz</label>
<input type="file" id="scenario" name="scenario" required
       accept=".toml,.json,.zip,.tar.gz,.tgz">
<label for="side">Files the scenario names (a base file, a measured damper table)</label>
<input type="file" id="side" name="side" multiple accept=".toml,.json,.csv">
<p class="hint">For example trail_air.toml next to trail_air_wet.toml (which says
<code>base = "trail_air.toml"</code>), or the damper table CSV a scenario names in
<code>measured_table</code>.</p>
<label for="scenario_file">Scenario in the folder (only when the archive holds several)</label>
<input type="text" id="scenario_file" name="scenario_file" value="{{ form.scenario_file }}">
</fieldset>
<fieldset><legend>Ride log (optional)</legend>
<label for="ride_log">Ride log of this bike (.csv)</label>
<input type="file" id="ride_log" name="ride_log" accept=".csv,.txt">
<p class="hint">With a log, the job first fits the scenario's course to what the bike did on
the ride, then searches on the fitted course. The log's layout is in docs/ride-logs.md; a
setup file its header names (<code># setup: FILE</code>) goes with the files above. A log the
service cannot read is refused here, by line, and nothing starts.</p>
<label for="fit_budget">Rides of the course fit</label>
<input type="number" id="fit_budget" name="fit_budget" min="{{ min_fit_budget }}"
       max="{{ max_fit_rides }}" value="{{ form.fit_budget }}">
<p class="hint">Empty: {{ default_fit_budget }}. From {{ min_fit_budget }} to
{{ max_fit_rides }} simulated rides; only with a ride log.</p>
<label for="fit_realisations">Course realisations of each ride of the fit</label>
<input type="number" id="fit_realisations" name="fit_realisations" min="1"
       max="{{ max_fit_realisations }}" value="{{ form.fit_realisations }}">
<p class="hint">Empty: {{ default_fit_realisations }}. At most {{ max_fit_realisations }};
only with a ride log.</p>
<p class="hint">Everything sent at once, the log included, may be at most {{ max_body }}.</p>
</fieldset>
<fieldset><legend>Budget</legend>
<label for="trials">Trials</label>
<input type="number" id="trials" name="trials" min="1" max="{{ max_trials }}"
       value="{{ form.trials }}">
<p class="hint">Empty: {{ default_trials }}. This service takes at most {{ max_trials }}.</p>
<label for="deadline">Stop by</label>
<input type="text" id="deadline" name="deadline" value="{{ form.deadline }}"
       placeholder="06:30 or 8">
<p class="hint">A time of day (HH:MM, this computer's clock) or a number of hours; counted from
when a worker starts the job. Empty: {{ max_hours }} hours, this service's limit. The job stops
at its trials or at this time, whichever comes first, and then ranks what it finished.</p>
<label for="realisations">Terrain realisations</label>
<input type="number" id="realisations" name="realisations" min="1" max="32"
       value="{{ form.realisations }}">
<p class="hint">Empty: {{ default_realisations }}. Fewer is quicker and noisier.</p>
</fieldset>
<p><button class="main" type="submit">Start the job</button></p>
</form>
<script nonce="{{ nonce }}">
document.getElementById("tz_offset").value = String(new Date().getTimezoneOffset());
// the service refuses a request over its size limit before reading it: say so here, by field
document.querySelector("form[enctype]").addEventListener("submit", function (e) {
  var total = 0, largest = null;
  document.querySelectorAll("input[type=file]").forEach(function (box) {
    for (var i = 0; i < box.files.length; i++) {
      total += box.files[i].size;
      if (!largest || box.files[i].size > largest.size) {
        largest = {field: box.name, name: box.files[i].name, size: box.files[i].size};
      }
    }
  });
  if (total <= {{ max_body_bytes }}) { return; }
  e.preventDefault();
  var box = document.getElementById("too_large");
  box.querySelector("strong").textContent = largest.field;
  box.querySelector("span").textContent = ": the files come to " + total + " bytes, above "
    + "this service's limit of {{ max_body_bytes }} bytes for a job (" + largest.name
    + " alone is " + largest.size + " bytes); send a shorter log or ask the operator to "
    + "raise TUNEOPT_MAX_BODY_BYTES";
  box.hidden = false;
  box.scrollIntoView();
});
</script>
{% endblock %}
"""

JOB = """{% extends "layout" %}{% block body %}
<h1>{{ j.scenario }}</h1>
<p class="lead"><span class="state" id="state">{{ j.state_text }}</span>
{% if refresh %}&middot; this page updates itself every {{ refresh }} seconds{% endif %}</p>
<dl class="status">
<dt>{{ "Course fit" if j.fitting else "Trials" }}</dt>
<dd><progress max="{{ j.bar_max }}" value="{{ j.bar_value }}"></progress>
<span class="trials">{{ j.trials }}</span></dd>
<dt>Best search score</dt><dd>{{ j.best or "none yet" }}{% if j.best %} (lower is better;
the recommended setups below are scored again on fresh terrain){% endif %}</dd>
{% if j.left %}<dt>Time left</dt><dd>{{ j.left }}</dd>{% endif %}
{% if j.pace %}<dt>Pace</dt><dd>{{ j.pace }}</dd>{% endif %}
<dt>Submitted</dt><dd>{{ j.submitted }}</dd>
{% if j.ran %}<dt>Ran</dt><dd>{{ j.ran }}</dd>{% endif %}
{% if j.deadline %}<dt>Deadline</dt><dd>{{ j.deadline }}</dd>{% endif %}
<dt>Job</dt><dd><code>{{ j.id }}</code></dd>
</dl>
{% if j.live %}
<form method="post" action="{{ base }}/jobs/{{ j.id }}/cancel">
<p><button class="stop" type="submit" {% if j.cancel_requested %}disabled{% endif %}>
{% if j.cancel_requested %}Cancel asked for{% else %}Cancel the job{% endif %}</button>
<span class="hint">The setups finished so far are still ranked.</span></p>
</form>
{% endif %}
{% if fit %}
<h2>Course fit</h2>
<p id="fit">{{ fit.said }}</p>
{% if fit.lines %}<ul class="note" id="fit-lines">{% for line in fit.lines %}<li>{{ line }}</li>
{% endfor %}</ul>{% endif %}
{% if fit.kept %}
<p><a class="button" id="fit-page" href="{{ base }}/jobs/{{ j.id }}/fit/page">The fit's page</a>
<a id="fit-scenario" href="{{ base }}/jobs/{{ j.id }}/fit/scenario">fitted scenario (TOML)</a>
<span class="hint">the scenario with its course fitted to {{ fit.log }}: the search runs on it,
and <code>tuneopt optimise</code> takes it as it is</span></p>
{% endif %}
{% endif %}
{% if errors %}<h2>Errors</h2><ul class="findings">
{% for e in errors %}<li>{{ e }}</li>{% endfor %}</ul>{% endif %}
{% if events %}<h2>Events</h2><ul class="note">{% for e in events %}<li>{{ e }}</li>{% endfor %}
</ul>{% endif %}
{% if ranked %}
<h2>Recommended setups</h2>
<p><a class="button" id="report" href="{{ base }}/jobs/{{ j.id }}/report">Open the report</a>
<a class="button" id="sheet" href="{{ base }}/jobs/{{ j.id }}/sheet">Setup sheets to print</a>
<a href="{{ base }}/jobs/{{ j.id }}/result.json">result.json</a></p>
<ol class="ranked">
{% for r in ranked %}<li><a href="{{ base }}/jobs/{{ j.id }}/sheet?rank={{ r.rank }}">sheet</a>:
{{ r.lead }}</li>{% endfor %}
</ol>
{% elif j.state == "done" or j.state == "cancelled" or j.state == "failed" %}
<p>{{ no_result }}</p>
{% endif %}
{{ cautions_html }}
{% endblock %}
"""


def render_page(name: str, **context: Any) -> str:
    """Render one of the pages ("login", "jobs", "new", "job") with the shared style."""
    import jinja2
    from markupsafe import Markup

    env = jinja2.Environment(
        loader=jinja2.DictLoader(
            {"layout": LAYOUT, "login": LOGIN, "jobs": JOBS, "new": NEW, "job": JOB}
            | {"cautions": CAUTIONS}
        ),
        autoescape=True,
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
    )
    cautions = context.pop("cautions", None)
    if cautions:
        context["cautions_html"] = Markup(  # noqa: S704 - our own template, escaped inside
            env.get_template("cautions").render(cautions=cautions)
        )
    else:
        context["cautions_html"] = ""
    context.setdefault("refresh", 0)
    context.setdefault("nonce", "")
    return env.get_template(name).render(style=Markup(STYLE + PAGE_STYLE), **context)  # noqa: S704
