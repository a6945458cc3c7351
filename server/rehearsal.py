"""Rehearsal: bots play seats of a live session through its real sockets.

Each bot is an ordinary Socket.IO client that presents a seat secret, exactly
as a phone does, plus the session's rehearsal credential (``agent = "bot"``, so its
decisions are exported with source ``bot``; a phone cannot claim that without the
credential, which only the database holds), and answers every open round it is shown with a behaviour model
(``game_logic.behaviour``) read from its own participant view: the same code and
the same per-group draws as the pilot. A researcher uses it to try the room's router
and laptop before the trip; tests use it to play whole sessions.
"""

from __future__ import annotations

import threading
import time
from dataclasses import dataclass, field

import numpy as np
import socketio

from ebbtide.game_logic.behaviour import Model, choose_from_view, make_model
from ebbtide.game_logic.seeding import strategy_rng
from ebbtide.game_logic.study import Study

from .console.access import rehearsal_token
from .store import SeatKey


@dataclass
class Bot:
    """One seat played by a behaviour model; remembers what it sent and what came back.

    ``rng`` paces the bot (thinking time); its choices come from the model and the
    seed tree, keyed by its group.
    """

    key: SeatKey
    token: str  # console/access.py rehearsal_token: derived from the session's key in the database
    model: Model
    study: Study
    seed: int
    rng: np.random.Generator
    think_seconds: tuple[float, float]
    client: socketio.Client = field(default_factory=lambda: socketio.Client(reconnection=True))
    latest: dict | None = None
    acknowledged: int = 0
    refused: int = 0
    last_refusal: str = ""
    _asking: tuple[int, int, bool] | None = None
    _answering: str = ""  # the field-day screen last answered (consent, questions, ...)
    _lock: threading.Lock = field(default_factory=threading.Lock)

    def start(self, url: str) -> None:
        self.client.on("snapshot", self._on_snapshot)
        self.client.connect(
            url,
            auth={"secret": self.key.secret, "device": f"bot-{self.key.short_code}", "agent": "bot",
                  "rehearsal": self.token},
            transports=["websocket"],
            wait_timeout=10,
        )

    @property
    def finished(self) -> bool:
        snap = self.latest
        over = bool(snap) and (snap["status"] == "ended" or snap["view"]["session_over"])
        day = (snap or {}).get("field_day") or {}
        return over and day.get("stage", "end") in ("end", "declined")

    def _on_snapshot(self, snap: dict) -> None:
        with self._lock:
            if self.latest and snap["seq"] < self.latest["seq"]:
                return  # an older picture arriving late changes nothing (as on the phone page)
            self.latest = snap
            day = snap.get("field_day") or {}
            if day.get("stage", "game") not in ("game", "end", "declined"):
                screen = repr(day)
                if screen != self._answering:
                    self._answering = screen
                    event, body = field_day_answer(day, self.rng)
                    pause = float(self.rng.uniform(*self.think_seconds))
                    threading.Timer(pause, self._call, args=(event, body)).start()
                return
            view = snap["view"]
            open_round = (
                snap["status"] == "running" and not snap["decided"]
                and not snap["waiting_for_block"] and not view["block_over"]
            )
            where = (view["block"], view["round"], bool(view.get("practice")))
            if not open_round or self._asking == where:
                return
            self._asking = where
            harvest = choose_from_view(self.model, self.study, view, self.seed, self.key.group)
            pause = float(self.rng.uniform(*self.think_seconds))
        threading.Timer(pause, self._send, args=(where, harvest)).start()

    def _send(self, where: tuple[int, int, bool], harvest: int) -> None:
        block, round_number, practice = where
        # One id per seat and round: a resend after a reconnect is never counted twice.
        decision_id = f"bot-{self.key.short_code}-b{block}-r{round_number}" + ("-p" if practice else "")
        body = {"decision_id": decision_id, "block": block, "round": round_number,
                "harvest": harvest, "practice": practice}
        self._call("harvest", body)

    def _call(self, event: str, body: dict) -> None:
        reply = None
        # The first snapshot arrives while the connection is still being confirmed,
        # and a reconnect can drop it again: retry a few times, then give up.
        for _attempt in range(20):
            try:
                reply = self.client.call(event, body, timeout=10)
                break
            except socketio.exceptions.BadNamespaceError as exc:
                reply = {"ok": False, "message": f"not connected: {exc}"}
                time.sleep(0.1)
            except socketio.exceptions.TimeoutError as exc:
                reply = {"ok": False, "message": f"no answer: {exc}"}
                break
        with self._lock:
            if reply and reply.get("ok"):
                self.acknowledged += 1
            else:
                self.refused += 1
                self.last_refusal = str((reply or {}).get("message", reply))
                self._asking = None  # let the next snapshot try this round again
                self._answering = ""

    def stop(self) -> None:
        if self.client.connected:
            self.client.disconnect()


def field_day_answer(day: dict, rng: np.random.Generator) -> tuple[str, dict]:
    """A bot's answer to a field-day screen: it agrees, reads every instruction screen,
    tries the choices of a question in order until one is right, gives a valid answer
    to each questionnaire item and picks an envelope at random."""
    stage = day["stage"]
    if stage in ("consent", "replace"):
        consent = day["consent"]
        return "consent", {"agree": True, "language": consent["language"],
                           "text_sha256": consent["text_sha256"]}
    if stage == "instructions":
        return "instruction_step", {"step": day["instruction"]["steps"]}
    if stage == "comprehension":
        question = day["question"]
        choice = question["wrong_tries"] % len(question["choices"]) + 1
        return "comprehension_answer", {"question": question["id"], "choice": choice}
    if stage == "risk":
        return "risk_choice", {"gamble": int(rng.integers(len(day["risk"]["gambles"]))) + 1}
    item = day["survey"]
    answer = {"single": 1, "multiple": [1], "scale": 3, "text": ""}.get(item["kind"], item["min"])
    return "survey_answer", {"questionnaire": item["questionnaire"], "item": item["item"], "answer": answer}


@dataclass(frozen=True)
class RehearsalResult:
    bots: int
    acknowledged: int
    refused: int
    finished: bool
    seconds: float


def rehearse(
    url: str,
    study: Study,
    keys: list[SeatKey],
    session_secret: str,
    strategy: Model | str = "conditional",
    seed: int = 1,
    think_seconds: tuple[float, float] = (0.2, 1.5),
    max_seconds: float = 600.0,
) -> RehearsalResult:
    """Connect one bot per seat key and play until the session ends or time runs out.

    The facilitator still paces the session from the console (start, open
    blocks, end): bots only answer the rounds they are shown.
    """
    model = make_model(strategy, study) if isinstance(strategy, str) else strategy
    token = rehearsal_token(session_secret)
    pace = strategy_rng(seed)
    bots = [
        Bot(key, token, model, study, seed, np.random.default_rng(pace.integers(2**63)), think_seconds)
        for key in keys
    ]
    started = time.monotonic()
    try:
        for bot in bots:
            bot.start(url)
        while time.monotonic() - started < max_seconds:
            if all(bot.finished for bot in bots):
                break
            time.sleep(0.2)
    finally:
        for bot in bots:
            bot.stop()
    return RehearsalResult(
        bots=len(bots),
        acknowledged=sum(b.acknowledged for b in bots),
        refused=sum(b.refused for b in bots),
        finished=all(b.finished for b in bots),
        seconds=time.monotonic() - started,
    )
