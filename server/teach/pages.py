"""Pages for teaching: the debrief (projector), the per-group handout, the reveal, the live teaching view."""

from __future__ import annotations

from flask import Blueprint, current_app, redirect, render_template, request, url_for
from flask_babel import get_locale
from flask_babel import gettext as _

from ebbtide.exports.tables import group_code
from ebbtide.game_logic.early_debrief import safe_to_show, thresholds_still_to_play
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


def _early_wanted() -> bool:
    """The facilitator confirmed an early debrief (the warning's button adds ``early=1``)."""
    return request.args.get("early") == "1"


def _sorted_blocks(live, group: int, id_prefix: str) -> tuple[list[dict], list[dict]]:
    """The group's finished blocks split into (may be shown now, held back).

    After the end every finished block may be shown; before it, only blocks whose danger
    level no group plays again (``game_logic.early_debrief``).
    """
    blocks = debrief_blocks(live, group, id_prefix)
    if live.state.status == "ended":
        return blocks, []
    still = thresholds_still_to_play(live.study, live.state.seed, [p.state for p in live.state.groups])
    shown = [b for b in blocks if safe_to_show(b["threshold"], still)]
    return shown, [b for b in blocks if b not in shown]


def _named(group_id: str, block: dict) -> str:
    return f"{group_id} {_('Part %(n)s: %(name)s', n=block['part'], name=block['name'])}"


def _groups(live, early: bool) -> list[dict]:
    """Each group's blocks for the debrief page: all after the end, safe ones when early, else none."""
    showing = early or live.state.status == "ended"
    out = []
    for g in range(live.study.groups.count):
        safe, held = _sorted_blocks(live, g, f"g{g + 1}")
        out.append({"group": g + 1, "group_id": group_code(g), "safe_now": safe,
                    "blocks": safe if showing else [], "held": held if showing else []})
    return out


def _render_debrief(problem: str | None = None, status: int = 200):
    live = live_session()
    ended = live.state.status == "ended"
    early = _early_wanted() and not ended
    groups = _groups(live, early)
    gives_away = [_named(g["group_id"], b) for g in groups for b in g["safe_now"]]
    return render_template(
        "debrief.html", title=participant_title(live.study), groups=groups, study=live.study,
        revealed=live.state.debrief_revealed, session_status=live.state.status, problem=problem,
        ended=ended, early=early, gives_away=gives_away,
    ), status


@bp.get("/console/debrief")
@console_required
def debrief():
    """Projector view after the session: each group's threshold, path and what-if.

    Before the end it shows nothing until the facilitator confirms an early debrief (a
    warning names what it gives away), and then only blocks no group plays again under
    the same danger level.
    """
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
    safe, held = _sorted_blocks(live, group - 1, "handout")
    ended = live.state.status == "ended"
    early = _early_wanted() and not ended
    showing = ended or early
    return render_template(
        "handout.html", title=participant_title(live.study), group_id=group_code(group - 1), study=live.study,
        blocks=safe if showing else [], held=held if showing else [], ended=ended, early=early,
        gives_away=[_named(group_code(group - 1), b) for b in safe],
    )


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
