// The field day on the phone: consent, instruction steps with a sound button, comprehension
// with feedback, questionnaires, the risk task and the end screen with the cash to collect.
// Everything shown comes from the snapshot's field_day part (built by the server's gate);
// phone.js calls render(snap) and shows the game itself when this returns false.
(function () {
  "use strict";
  var P = null;  // phone.js hands over its socket, strings and helpers
  var shownKey = "";
  var picked = null;  // the choice(s) selected on the screen, before sending

  function el(tag, cls, text) {
    var node = document.createElement(tag);
    if (cls) node.className = cls;
    if (text !== undefined && text !== null) node.textContent = text;
    return node;
  }

  function button(label, cls, onClick) {
    var b = el("button", cls, label);
    b.type = "button";
    b.addEventListener("click", onClick);
    return b;
  }

  function send(event, body) {
    P.socket.timeout(8000).emit(event, body, function (err, ack) {
      if (err) { P.showProblem({ message: P.S.offline }); return; }
      if (!ack.ok) P.showProblem(ack);
    });
  }

  function media(box, screen) {
    if (screen.picture) {
      var img = el("img", "day-picture");
      img.src = "/media/" + screen.picture;
      img.alt = "";
      box.appendChild(img);
    }
    if (screen.sound) {
      var audio = el("audio");
      audio.src = "/media/" + screen.sound;
      audio.preload = "auto";
      audio.id = "day-audio";
      box.appendChild(audio);
      box.appendChild(button("\u25B6 " + P.S.day_listen, "primary wide sound-button", function () {
        audio.currentTime = 0;
        audio.play();
      }));
    }
  }

  function choices(box, labels, multiple, onPick) {
    var list = el("div", "day-choices");
    list.setAttribute("role", multiple ? "group" : "radiogroup");
    labels.forEach(function (label, i) {
      var b = button(label, "day-choice", function () {
        var n = i + 1;
        if (multiple) {
          picked = picked || [];
          var at = picked.indexOf(n);
          if (at >= 0) picked.splice(at, 1); else picked.push(n);
        } else {
          picked = n;
        }
        Array.prototype.forEach.call(list.children, function (c, j) {
          var on = multiple ? picked.indexOf(j + 1) >= 0 : picked === j + 1;
          c.classList.toggle("chosen", on);
          c.setAttribute("aria-pressed", on ? "true" : "false");
        });
        if (onPick) onPick();
      });
      b.dataset.choice = String(i + 1);
      b.setAttribute("aria-pressed", "false");
      list.appendChild(b);
    });
    box.appendChild(list);
    return list;
  }

  function sendButton(label, ready, onSend) {
    var b = button(label, "primary wide day-send", function () {
      if (!ready()) return;
      b.disabled = true;
      onSend();
    });
    return b;
  }

  function consent(box, c) {
    box.appendChild(el("h2", null, P.S.day_consent_title));
    box.appendChild(el("p", "day-text consent-text", c.text));
    var yes = button("\u2713 " + P.S.day_agree, "primary wide big-choice", function () {
      send("consent", { agree: true, language: c.language, text_sha256: c.text_sha256 });
    });
    yes.id = "consent-agree";
    var no = button("\u2717 " + P.S.day_decline, "wide big-choice decline", function () {
      send("consent", { agree: false, language: c.language, text_sha256: c.text_sha256 });
    });
    no.id = "consent-decline";
    box.appendChild(yes);
    box.appendChild(no);
  }

  function instruction(box, s) {
    box.appendChild(el("p", "label", P.fmt("day_step", { n: s.step + 1, count: s.steps })));
    box.appendChild(el("p", "day-text", s.text));
    media(box, s);
    if (s.led) box.appendChild(el("p", "quiet", P.S.day_led));
    var nav = el("div", "day-nav");
    if (s.step > 0) nav.appendChild(button("\u2190 " + P.S.day_back, "day-back", function () {
      send("instruction_step", { step: s.step - 1 });
    }));
    var last = s.step + 1 >= s.steps;
    var next = button((last ? P.S.day_done : P.S.day_next) + " \u2192", "primary day-next", function () {
      send("instruction_step", { step: s.step + 1 });
    });
    next.id = "instruction-next";
    nav.appendChild(next);
    box.appendChild(nav);
  }

  function question(box, q) {
    box.appendChild(el("p", "label", P.fmt("day_question", { n: q.number, count: q.count })));
    box.appendChild(el("p", "day-text", q.text));
    media(box, q);
    if (q.feedback) {
      var note = el("p", "notice day-feedback", q.feedback);
      note.setAttribute("role", "alert");
      box.appendChild(note);
      box.appendChild(el("p", "quiet", P.S.day_try_again));
    }
    choices(box, q.choices, false);
    box.appendChild(sendButton(P.S.day_check, function () { return picked !== null; }, function () {
      send("comprehension_answer", { question: q.id, choice: picked });
    }));
  }

  var SCALE = ["day_scale_1", "day_scale_2", "day_scale_3", "day_scale_4", "day_scale_5"];

  function survey(box, q) {
    box.appendChild(el("p", "label", P.fmt("day_item", { n: q.number, count: q.count })));
    box.appendChild(el("p", "day-text", q.text));
    media(box, q);
    var read = function () { return picked; };
    if (q.kind === "single") choices(box, q.choices, false);
    else if (q.kind === "multiple") { picked = []; choices(box, q.choices, true); }
    else if (q.kind === "scale") choices(box, SCALE.map(function (k) { return P.S[k]; }), false);
    else if (q.kind === "number") {
      var input = el("input", "day-number");
      input.type = "number"; input.inputMode = "numeric"; input.min = q.min; input.max = q.max;
      input.setAttribute("aria-label", q.text);
      box.appendChild(input);
      box.appendChild(el("p", "quiet", q.min + " \u2013 " + q.max));
      read = function () {
        var n = Number(input.value);
        return input.value !== "" && Math.floor(n) === n && n >= q.min && n <= q.max ? n : null;
      };
    } else {
      var area = el("textarea", "day-text-answer");
      area.maxLength = q.max_length; area.rows = 3;
      area.setAttribute("aria-label", q.text);
      box.appendChild(area);
      read = function () { return area.value; };
    }
    box.appendChild(sendButton(P.S.day_send, function () {
      var value = read();
      if (value === null) { P.showProblem({ message: P.S.day_answer_first }); return false; }
      return true;
    }, function () {
      send("survey_answer", { questionnaire: q.questionnaire, item: q.item, answer: read() });
    }));
  }

  function risk(box, r) {
    box.appendChild(el("h2", null, P.S.day_risk_title));
    box.appendChild(el("p", "day-text", r.text));
    media(box, r);
    choices(box, r.gambles.map(function (g, i) {
      return P.fmt("day_gamble", { n: i + 1, low: g[0], high: g[1] });
    }), false);
    if (!r.paid) box.appendChild(el("p", "quiet", P.S.day_risk_unpaid));
    box.appendChild(sendButton(P.S.day_send, function () { return picked !== null; }, function () {
      send("risk_choice", { gamble: picked });
    }));
  }

  function ending(box, stage, e) {
    // At the end the game's own screen stays below (its status line, results, a revealed debrief).
    if (stage !== "end") box.appendChild(el("h2", null, P.S.day_declined));
    if (stage === "replace") box.appendChild(el("p", null, P.S.day_hand_back));
    if (e.risk_gamble) {
      box.appendChild(el("p", null, P.fmt(e.risk_outcome === "high" ? "day_risk_high" : "day_risk_low",
        { n: e.risk_gamble, points: e.risk_points })));
    }
    var list = el("dl", "facts pay-lines");
    e.lines.forEach(function (line) {
      list.appendChild(el("dt", null, P.S["day_line_" + line.kind]));
      list.appendChild(el("dd", null, line.amount + " " + e.currency));
    });
    box.appendChild(list);
    var total = el("p", "big day-total", e.total + " " + e.currency);
    total.id = "day-total";
    box.appendChild(el("p", "label", P.S.day_total));
    box.appendChild(total);
    box.appendChild(el("p", "quiet", P.S.day_collect));
    if (stage === "replace") {
      box.appendChild(button(P.S.day_new_person, "primary wide", function () {
        shownKey = "new-person";
        var fresh = document.getElementById("day");
        fresh.textContent = "";
        consent(fresh, window.ebbtideDayConsent);
      }));
    }
  }

  function render(snap) {
    P = window.ebbtidePhone;
    var day = snap.field_day;
    var box = document.getElementById("day");
    var banner = document.getElementById("practice-banner");
    banner.textContent = P.S.day_practice;
    banner.hidden = !(day && day.practice && day.stage === "game" && snap.status !== "setup");
    if (!day || day.stage === "game") { box.hidden = true; shownKey = ""; return false; }
    box.hidden = false;
    var takesScreen = day.stage !== "end";
    window.ebbtideDayConsent = day.consent;
    var key = JSON.stringify(day);
    if (key === shownKey || (shownKey === "new-person" && day.stage === "replace")) return takesScreen;
    shownKey = key;
    picked = null;
    box.textContent = "";
    box.dataset.stage = day.stage;
    if (day.stage === "consent") consent(box, day.consent);
    else if (day.stage === "instructions") instruction(box, day.instruction);
    else if (day.stage === "comprehension") question(box, day.question);
    else if (day.stage === "survey_before" || day.stage === "survey_after") survey(box, day.survey);
    else if (day.stage === "risk") risk(box, day.risk);
    else ending(box, day.stage, day.end);
    return takesScreen;
  }

  window.ebbtideDay = { render: render };
})();
