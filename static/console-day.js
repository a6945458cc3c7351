// The console's panel of the day: stages against the plan, each seat's consent and stage,
// who is stuck on which question, leading a group's instruction screens, the timeline.
(function () {
  "use strict";
  var S = JSON.parse(document.getElementById("day-strings").textContent);
  var $ = function (id) { return document.getElementById(id); };
  function fmt(key, values) {
    return (S[key] || key).replace(/%\((\w+)\)s/g, function (_, n) { return values[n]; });
  }
  // The console's element helpers (console.js), one pair for every console script.
  function el(tag, text, cls) { return window.ebbtideConsole.el(tag, text, cls); }
  function row(cells, header) { return window.ebbtideConsole.row(cells, header); }

  function start() {
    var C = window.ebbtideConsole;
    if (!C) { window.setTimeout(start, 50); return; }
    C.socket.on("console_state", render);
  }

  function lead(group, step) {
    window.ebbtideConsole.socket.emit("console_lead_instructions", { group: group, step: step }, function () {});
  }

  function render(state) {
    var day = state.day;
    if (!day) return;
    var clock = day.elapsed_minutes === null ? "" : fmt("elapsed", { m: day.elapsed_minutes });
    clock += " · " + S["stage_" + day.current] + " · " +
      (day.behind_minutes > 0 ? fmt("behind", { m: day.behind_minutes }) : S.on_time);
    $("day-clock").textContent = clock;
    $("day-clock").classList.toggle("behind", day.behind_minutes > 0);

    var stages = $("day-stages");
    stages.textContent = "";
    stages.appendChild(row([S.stage, S.plan, S.started], true));
    day.stages.forEach(function (s) {
      if (s.planned_to === s.planned_from && !s.current) return;  // not part of this study's day
      var tr = row([S["stage_" + s.stage] + (s.current ? " \u25C0 " + S.now : ""),
        Math.round(s.planned_from) + "\u2013" + Math.round(s.planned_to),
        s.started_after === null ? "\u2014" : String(s.started_after)], false);
      if (s.current) tr.className = "current-stage";
      stages.appendChild(tr);
    });

    var seats = $("day-seats");
    seats.textContent = "";
    state.groups.forEach(function (g) {
      var box = el("div", null, "day-group");
      box.dataset.group = g.group;
      box.appendChild(el("h3", g.group_id + (g.practice && state.status !== "setup" ? " \u00B7 " + S.practice : "")));
      var table = el("table");
      table.appendChild(row([S.who, S.consent, S.where], true));
      g.seats.forEach(function (s) {
        var where = el("span", S["where_" + s.stage] || s.stage);
        if (s.stuck_on) {
          where = el("strong", fmt("stuck", { q: s.stuck_on, n: s.wrong_tries }), "stuck");
        }
        var tr = row([s.seat_id, S["consent_" + s.consent] || s.consent, where], false);
        tr.dataset.seat = s.seat_id;
        table.appendChild(tr);
      });
      box.appendChild(table);
      if (g.steps > 0) {
        var buttons = el("div", null, "buttons lead");
        var at = g.led_step === null || g.led_step === undefined ? -1 : g.led_step;
        buttons.appendChild(el("span", S.lead + ": " + (at < 0 ? "\u2014" : at >= g.steps ? S.lead_done :
          fmt("lead_step", { n: at + 1, count: g.steps })), "state-line"));
        var back = el("button", "\u2190 " + S.lead_back); back.type = "button";
        back.disabled = at <= 0 || state.status !== "setup";
        back.addEventListener("click", function () { lead(g.group, at); });
        var next = el("button", S.lead_next + " \u2192"); next.type = "button";
        next.className = "lead-next";
        next.disabled = at >= g.steps || state.status !== "setup";
        next.addEventListener("click", function () { lead(g.group, at + 2); });
        buttons.appendChild(back); buttons.appendChild(next);
        box.appendChild(buttons);
      }
      seats.appendChild(box);
    });

    var timeline = $("day-timeline");
    timeline.textContent = "";
    timeline.appendChild(row([S.time, S.what, S.who], true));
    day.timeline.slice().reverse().forEach(function (t) {
      var when = new Date(t.time).toLocaleTimeString();
      timeline.appendChild(row([when, t.kind.replace(/_/g, " ") + (t.detail ? ": " + t.detail : ""),
        t.seat_id || t.group_id], false));
    });
  }

  start();
})();
