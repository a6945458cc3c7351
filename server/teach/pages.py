"""Pages for teaching: the debrief (projector), the per-group handout, the reveal, the live teaching view."""

from __future__ import annotations

from flask import Blueprint, current_app, redirect, render_template, url_for
from flask_babel import get_locale
from flask_babel import gettext as _

from ebbtide.exports.tables import group_code
from ebbtide.game_logic.errors import Refused
from ebbtide.game_logic.treatments import participant_view

from ..phone.view import gauge_labels, language_choices, participant_title, phone_more_strings
from ..pictures.gauge import stock_gauge_svg
from ..web import console_required, live_session
from .revealed import debrief_blocks

bp = Blueprint("teach", __name__)


@bp.app_context_processor
def phone_page_extras() -> dict:
    """The phone page's extra words and its language switcher (used by ``phone.html``)."""
    registry = current_app.extensions["ebbtide"]
    offered = registry.current.study.session.languages if registry.current_id else ("en",)
    return {
        "phone_more_strings": phone_more_strings,
        "language_choices": lambda: language_choices(str(get_locale()), offered),
    }


def _groups(live) -> list[dict]:
    return [
        {"group": g + 1, "group_id": group_code(g), "blocks": debrief_blocks(live, g, f"g{g + 1}")}
        for g in range(live.study.groups.count)
    ]


def _render_debrief(problem: str | None = None, status: int = 200):
    live = live_session()
    return render_template(
        "debrief.html", title=participant_title(live.study), groups=_groups(live), study=live.study,
        revealed=live.state.debrief_revealed, session_status=live.state.status, problem=problem,
    ), status


@bp.get("/console/debrief")
@console_required
def debrief():
    """Projector view after a block or the session: each group's threshold, path and what-if."""
    return _render_debrief()


@bp.post("/console/debrief/reveal")
@console_required
def reveal():
    """Facilitator: show each phone its own group's debrief (a logged event)."""
    from ..sockets import send_everyone  # sockets registers handlers on import; imported late

    live = live_session()
    try:
        live.submit("debrief_revealed", {})
    except Refused as exc:
        return _render_debrief(problem=_("Not revealed: %(message)s", message=exc.message), status=409)
    send_everyone(live)
    return redirect(url_for("teach.debrief"), code=303)


@bp.get("/console/debrief/handout/<int:group>")
@console_required
def handout(group: int):
    """One printable A4 page for one group to keep, with the caution line."""
    live = live_session()
    count = live.study.groups.count
    if not 1 <= group <= count:
        return render_template("teach_refused.html", title=live.study.session.title,
                               message=_("There is no group %(g)s; groups run from 1 to %(n)s.",
                                         g=group, n=count)), 404
    blocks = debrief_blocks(live, group - 1, "handout")
    return render_template("handout.html", title=participant_title(live.study),
                           group_id=group_code(group - 1), blocks=blocks, study=live.study)


def _teaching_refused():
    live = live_session()
    message = _("The live teaching view is off for this session. It shows every group's stock to "
                "the whole room, which changes the treatment, so it is off unless the study file "
                "sets session.teaching_view = true (for workshops, not research sessions).")
    return render_template("teach_refused.html", title=live.study.session.title, message=message), 403


def teaching_gauges(live) -> list[dict]:
    """Each group's stock as its own seats see it (participant view of seat 1), no seat codes."""
    labels = gauge_labels()
    out = []
    for g, progress in enumerate(live.state.groups):
        view = participant_view(live.study, progress.state, 0, progress.last_outcome, 0)
        out.append({"group_id": group_code(g), "round": view["round"], "block": view["block"],
                    "svg": stock_gauge_svg(view, labels=labels, id_prefix=f"teach-g{g + 1}")})
    return out


@bp.get("/teach")
@console_required
def teaching_view():
    """Projector during play: every group's gauge, anonymous; only when the study allows it."""
    live = live_session()
    if not live.study.session.teaching_view:
        return _teaching_refused()
    return render_template("teach.html", title=participant_title(live.study), groups=teaching_gauges(live))


@bp.get("/teach/gauges.json")
@console_required
def teaching_gauges_json():
    """The teaching view's gauges, polled by its page."""
    live = live_session()
    if not live.study.session.teaching_view:
        return {"ok": False, "message": _("The live teaching view is off for this session.")}, 403
    return {"ok": True, "seq": live.state.seq, "groups": teaching_gauges(live)}
