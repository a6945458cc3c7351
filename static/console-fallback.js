// The console's fall-back section: harvests typed for dead phones or from paper slips,
// corrections of open rounds, pausing one group, releasing a seat. Every action goes
// through the same socket as the live view and is checked by the server.
(function () {
  "use strict";
  var S = JSON.parse(document.getElementById("fallback-strings").textContent);
  var $ = function (id) { return document.getElementById(id); };
  var socket = window.ebbtideConsole.socket;
  window.ebbtideConsole.fallbackEvents = ["console_enter", "console_correct", "console_slips",
    "console_pause_group", "console_resume_group", "console_release_seat"];
  var state = null;
  var shownKey = "";  // the table is rebuilt only when the group or its round changes, keeping typed values
  var messageKey = "";  // the group and round the last message was shown in

  function fmt(key, values) {
    return (S[key] || key).replace(/%\((\w+)\)s/g, function (_, n) { return values[n]; });
  }
  var el = window.ebbtideConsole.el;  // one element helper for the whole console
  function randomId() {
    var bytes = new Uint8Array(12);
    window.crypto.getRandomValues(bytes);
    return Array.prototype.map.call(bytes, function (b) { return ("0" + b.toString(16)).slice(-2); }).join("");
  }
  function typed(box) {
    var v = box.value.trim();
    if (v === "") return null;
    return /^\d+$/.test(v) ? parseInt(v, 10) : v;  // anything else goes as typed: the server says what is allowed
  }

  function group() {
    if (!state) return null;
    var n = parseInt($("fallback-group").value, 10);
    return state.groups.filter(function (g) { return g.group === n; })[0] || null;
  }
  function roundOpen(g) {
    return g && !g.waiting_for_block && !g.session_over && (state.status === "running" || state.status === "paused");
  }
  function by() { return $("fallback-by").value.trim(); }

  function say(ack, what) {
    $("fallback-problem").hidden = true;
    $("fallback-done").hidden = true;
    messageKey = shownKey;
    if (ack && ack.ok) {
      $("fallback-done").textContent = fmt("done", { what: what });
      $("fallback-done").hidden = false;
    } else if (ack) {
      $("fallback-problem").textContent = ack.message;
      $("fallback-problem").hidden = false;
    }
  }
  function send(event, body, what, onOk) {
    socket.emit(event, body, function (ack) {
      say(ack, what);
      if (ack && ack.ok && onOk) onOk();
    });
  }

  socket.on("console_state", function (s) {
    if (state && s.seq < state.seq) return;
    state = s;
    render();
  });

  $("fallback-group").addEventListener("change", function () { shownKey = ""; render(); });
  $("fallback-pause").addEventListener("click", function () {
    var g = group(); if (!g) return;
    send("console_pause_group", { group: g.group, by: by() }, S.pause);
  });
  $("fallback-resume").addEventListener("click", function () {
    var g = group(); if (!g) return;
    send("console_resume_group", { group: g.group, by: by() }, S.resume);
  });
  $("fallback-enter-all").addEventListener("click", function () {
    var g = group(); if (!roundOpen(g)) return;
    var boxes = g.seats.map(function (s) { return $("fallback-h-" + s.seat); });
    var harvests = boxes.map(typed);
    var list = g.seats.map(function (s, i) {
      return s.seat_id + ": " + (harvests[i] === null ? S.empty : harvests[i]);
    }).join("\n");
    if (!window.confirm(fmt("confirm_slips", { group: g.group_id, block: g.block, round: g.round }) + "\n" + list)) return;
    send("console_slips", { batch_id: randomId(), group: g.group, block: g.block, round: g.round,
                            harvests: harvests, by: by() }, S.enter_all,
         function () { boxes.forEach(function (b) { b.value = ""; }); });
  });

  function seatAction(g, s, kind) {
    var box = $("fallback-h-" + s.seat);
    if (kind === "release") {
      if (!window.confirm(fmt("confirm_release", { seat: s.seat_id }))) return;
      send("console_release_seat", { group: g.group, seat: s.seat, by: by() }, S.release + " " + s.seat_id);
      return;
    }
    var harvest = typed(box);
    if (harvest === null) { say({ ok: false, message: S.type_number }); box.focus(); return; }
    var body = { decision_id: randomId(), group: g.group, seat: s.seat, block: g.block, round: g.round,
                 harvest: harvest, by: by() };
    if (kind === "correct") body.supersedes = s.entry;
    send(kind === "correct" ? "console_correct" : "console_enter", body,
         s.seat_id + " = " + harvest, function () { box.value = ""; });
  }

  function phoneCell(s) {
    var span;
    if (s.devices === 0) span = el("span", S.no_device, "offline-mark");
    else if (s.online > 0) span = el("span", S.online, "online-mark");
    else span = el("span", S.offline, "offline-mark");
    var text = span.textContent;
    if (s.devices > 1) text += " (" + fmt("devices", { n: s.devices }) + ")";
    if (s.released) text += " · " + S.released;
    span.textContent = text;
    return span;
  }
  function entryText(s) {
    if (!s.decided) return S.none_yet;
    return fmt(s.source === "console" ? "by_console" : "by_phone", { n: s.harvest });
  }

  function buildTable(g) {
    var table = $("fallback-seats");
    table.textContent = "";
    var head = el("tr");
    [S.seat, S.code, S.phone, S.entry, S.new_harvest, S.actions].forEach(function (h) { head.appendChild(el("th", h)); });
    table.appendChild(head);
    g.seats.forEach(function (s) {
      var tr = el("tr");
      tr.dataset.seat = s.seat;
      tr.appendChild(el("td", s.seat_id));
      tr.appendChild(el("td", s.short_code));
      tr.appendChild(el("td", null, "phone-cell"));
      tr.appendChild(el("td", null, "entry-cell"));
      var cell = el("td");
      var box = el("input");
      box.id = "fallback-h-" + s.seat;
      box.type = "text"; box.inputMode = "numeric"; box.autocomplete = "off"; box.maxLength = 6;
      box.setAttribute("aria-label", S.new_harvest + " " + s.seat_id);
      cell.appendChild(box);
      tr.appendChild(cell);
      var actions = el("td");
      var buttons = el("div", null, "buttons");
      [["enter", S.enter], ["correct", S.correct], ["release", S.release]].forEach(function (pair) {
        var b = el("button", pair[1]);
        b.type = "button";
        b.className = "act-" + pair[0];
        b.addEventListener("click", function () {
          var now = group();
          var seat = now && now.seats.filter(function (x) { return x.seat === s.seat; })[0];
          if (seat) seatAction(now, seat, pair[0]);
        });
        buttons.appendChild(b);
      });
      actions.appendChild(buttons);
      tr.appendChild(actions);
      table.appendChild(tr);
    });
  }

  function render() {
    if (!state) return;
    var picker = $("fallback-group");
    if (picker.options.length !== state.groups.length) {
      picker.textContent = "";
      state.groups.forEach(function (g) {
        var o = el("option", g.group_id);
        o.value = g.group;
        picker.appendChild(o);
      });
    }
    var g = group();
    if (!g) return;
    var open = roundOpen(g);
    $("fallback-round").textContent = (open ? fmt("round_line", { block: g.block, round: g.round }) : S.no_round) +
      (g.paused ? " · " + S.group_paused : "");
    $("fallback-pause").hidden = g.paused;
    $("fallback-resume").hidden = !g.paused;
    $("fallback-pause").disabled = $("fallback-resume").disabled = state.status === "ended";
    $("fallback-enter-all").disabled = !open;
    var key = g.group + "." + g.block + "." + g.round + "." + g.seats.length;
    if (key !== shownKey) { buildTable(g); shownKey = key; }
    // "Stored: ..." and refusals belong to the round they were shown in, not to later ones.
    if (messageKey && messageKey !== key) {
      $("fallback-done").hidden = true;
      $("fallback-problem").hidden = true;
      messageKey = "";
    }
    g.seats.forEach(function (s) {
      var tr = $("fallback-seats").querySelector('tr[data-seat="' + s.seat + '"]');
      var phone = tr.querySelector(".phone-cell");
      phone.textContent = "";
      phone.appendChild(phoneCell(s));
      tr.querySelector(".entry-cell").textContent = entryText(s);
      tr.querySelector(".act-enter").disabled = !open || s.decided;
      tr.querySelector(".act-correct").disabled = !open || !s.decided;
      tr.querySelector(".act-release").disabled = s.devices === 0;
      $("fallback-h-" + s.seat).disabled = !open;
    });
  }
})();
