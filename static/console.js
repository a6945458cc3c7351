// The console: live seats and results per group, and the facilitator's pacing buttons.
(function () {
  "use strict";
  var S = JSON.parse(document.getElementById("console-strings").textContent);
  var $ = function (id) { return document.getElementById(id); };
  function fmt(key, values) {
    return (S[key] || key).replace(/%\((\w+)\)s/g, function (_, n) { return values[n]; });
  }
  function el(tag, text, cls) {
    var node = document.createElement(tag);
    if (text !== undefined && text !== null) node.textContent = text;
    if (cls) node.className = cls;
    return node;
  }
  function row(cells, header) {
    var tr = el("tr");
    cells.forEach(function (c) {
      var cell = el(header ? "th" : "td");
      if (c instanceof Node) cell.appendChild(c); else cell.textContent = c;
      tr.appendChild(cell);
    });
    return tr;
  }
  function mark(yes) { return el("span", yes ? S.yes : S.no, yes ? "mark-yes" : "mark-no"); }

  var socket = io({ auth: { role: "console" } });
  var state = null;
  // The fall-back section (console-fallback.js) shares this connection.
  window.ebbtideConsole = { socket: socket, el: el, row: row };

  socket.on("connect", function () { $("connection").textContent = S.connected; });
  socket.on("disconnect", function () { $("connection").textContent = S.disconnected; });
  socket.on("connect_error", function (err) {
    // The login ended (logged out elsewhere, idle too long, or the server restarted): ask for the PIN.
    if (err && err.data && err.data.code === "login_needed") { window.location.assign("/console/login"); return; }
    $("connection").textContent = S.disconnected;
  });
  socket.on("console_state", function (s) {
    if (state && s.seq < state.seq) return;
    state = s;
    render();
  });
  socket.on("problem", function (p) {
    var fallback = window.ebbtideConsole.fallbackEvents || [];
    if (fallback.indexOf(p.event) >= 0) return;  // the fall-back section shows its own refusals
    $("console-problem").textContent = fmt("refused", { message: p.message });
    $("console-problem").hidden = false;
  });

  function act(event, body) {
    $("console-problem").hidden = true;
    socket.emit(event, body || {}, function () {});
  }
  $("cautions-read").addEventListener("change", render);
  $("start").addEventListener("click", function () { act("console_start"); });
  $("pause").addEventListener("click", function () { act("console_pause"); });
  $("resume").addEventListener("click", function () { act("console_resume"); });
  $("open-all").addEventListener("click", function () { act("console_open_block", { group: null }); });
  $("end").addEventListener("click", function () {
    if (window.confirm($("end").textContent + "?")) act("console_end");
  });

  // One seat's state for the overview: told by a symbol and a word, never by colour alone.
  function seatState(s, g) {
    if (s.devices === 0) return { cls: "seat-none", mark: "\u25cb", word: S.not_joined };
    if (s.online === 0) return { cls: "seat-offline", mark: "\u2717", word: S.offline };
    if (s.decided) return { cls: "seat-decided", mark: "\u2713", word: S.decided };
    var open = state.status === "running" && !g.waiting_for_block && !g.session_over && !g.paused;
    var others = g.seats.filter(function (x) { return x !== s; });
    if (open && others.length && others.every(function (x) { return x.decided; })) {
      return { cls: "seat-stuck", mark: "!", word: S.stuck };
    }
    return { cls: "seat-online", mark: "\u2022", word: S.online };
  }

  // A seat held by more than one phone (at once, or one after another since its last release).
  function manyPhones(s) {
    if (s.online > 1) return " \u00b7 " + fmt("phones", { n: s.online });
    if (s.devices > 1) return " \u00b7 " + fmt("devices", { n: s.devices });
    return "";
  }

  function groupLine(g) {
    if (state.status === "setup") return S.status_setup;
    return g.session_over ? S.group_done : g.waiting_for_block ? S.waiting_block : g.paused ? S.group_paused : S.playing;
  }

  function renderOverview() {
    var seats = 0, joined = 0, decided = 0, offline = 0;
    var grid = $("overview-grid");
    grid.textContent = "";
    state.groups.forEach(function (g) {
      var tile = el("a", null, "tile");
      tile.href = "#group-" + g.group;
      tile.dataset.group = g.group;
      tile.appendChild(el("span", g.group_id + " · " + S.round + " " + g.round + " · " + g.stock, "tile-title"));
      tile.appendChild(el("span", groupLine(g), "tile-line"));
      var marks = el("span", null, "tile-seats");
      g.seats.forEach(function (s) {
        var st = seatState(s, g);
        seats += 1;
        if (s.devices > 0) joined += 1;
        if (s.decided) decided += 1;
        if (s.devices > 0 && s.online === 0) offline += 1;
        var many = manyPhones(s);
        var mark = el("span", st.mark, "seat-mark " + st.cls + (many ? " seat-many" : ""));
        mark.title = s.seat_id + ": " + st.word + many;
        mark.setAttribute("aria-label", mark.title);
        marks.appendChild(mark);
      });
      tile.appendChild(marks);
      grid.appendChild(tile);
    });
    $("summary").textContent = fmt("summary", { joined: joined, seats: seats, decided: decided, offline: offline });
  }

  function render() {
    if (!state) return;
    var guessing = state.guessing;
    $("guessing-warning").hidden = !guessing;
    if (guessing) {
      $("guessing-warning").textContent = fmt("guessing", { n: guessing.wrong_codes, minutes: guessing.minutes });
    }
    // The cautions come first before the start; afterwards they fold away below everything else.
    var setup = $("setup");
    if (state.status !== "setup" && !setup.dataset.folded) {
      setup.dataset.folded = "1";
      setup.open = false;
      setup.parentNode.appendChild(setup);
    }
    renderOverview();
    $("status-word").textContent = S["status_" + state.status];
    $("start").disabled = state.status !== "setup" || !$("cautions-read").checked;
    $("start").hidden = state.status !== "setup";
    $("pause").hidden = state.status !== "running";
    $("resume").hidden = state.status !== "paused";
    $("end").disabled = state.status === "ended";
    $("open-all").disabled = !state.groups.some(function (g) { return g.waiting_for_block; });
    var box = $("groups");
    box.textContent = "";
    state.groups.forEach(function (g) { box.appendChild(groupCard(g)); });
  }

  // teach: the group's small gauge, its talk pause controls and the signal's hidden parts.
  function teachParts(card, hidden, g) {
    if (g.hidden.health) {
      var h = g.hidden.health;
      hidden.appendChild(el("p", S.health + ": " + h.band + " · " + fmt("health_parts",
        { score: h.score, level: h.level, pace: h.pace, slowing: h.slowing })));
    }
    if (g.gauge_svg) {
      var gauge = el("div", null, "console-gauge");
      gauge.innerHTML = g.gauge_svg;  // drawn by the server from the seats' own view
      card.insertBefore(gauge, hidden);
    }
    if (g.talk_remaining !== null && g.talk_remaining !== undefined && g.talk_remaining > 0) {
      var talk = el("div", null, "buttons talk-controls");
      // The server sends seconds left; shown as a clock time, which stays true without ticking.
      // In the page's language (CLDR through the browser): "14:05:30" on a Spanish console, not "2:05:30 PM".
      var until = new Date(Date.now() + g.talk_remaining * 1000).toLocaleTimeString(document.documentElement.lang);
      talk.appendChild(el("p", fmt("talk_left", { time: until }), "state-line"));
      var more = el("button", S.talk_more); more.type = "button";
      more.addEventListener("click", function () { act("console_talk_extend", { group: g.group }); });
      var end = el("button", S.talk_end); end.type = "button";
      end.addEventListener("click", function () { act("console_talk_end", { group: g.group }); });
      talk.appendChild(more); talk.appendChild(end);
      card.insertBefore(talk, hidden);
    }
  }

  function groupCard(g) {
    var card = el("section", null, "card group");
    card.dataset.group = g.group;
    card.id = "group-" + g.group;
    card.appendChild(el("h2", S.group + " " + g.group_id));
    var line = groupLine(g);
    if (g.practice && state.status !== "setup") card.appendChild(el("p", "\u270E " + S.practice, "notice"));
    card.appendChild(el("p", S.block + " " + g.block + "/" + state.blocks + " (" + g.block_name + ", " +
      g.treatment + ") · " + S.round + " " + g.round + " · " + S.stock + " " + g.stock + " · " + line, "state-line"));

    var hidden = el("div", null, "hidden-values");
    hidden.appendChild(el("span", S.hidden, "tag"));
    hidden.appendChild(el("p", S.threshold + ": " + (g.hidden.threshold === null ? "—" : g.hidden.threshold.toFixed(1)) +
      " · " + S.regime + ": " + g.hidden.regime));
    card.appendChild(hidden);
    teachParts(card, hidden, g);

    var seats = el("table");
    seats.appendChild(row([S.seat, S.code, S.phone, S.decided, S.points, ""], true));
    g.seats.forEach(function (s) {
      var st = seatState(s, g);
      var phone = el("span", st.mark + " " + (s.decided ? (s.online ? S.online : S.offline) : st.word),
                     "seat-word " + st.cls);
      phone.textContent += manyPhones(s);
      if (manyPhones(s)) phone.classList.add("seat-many-word");
      var decided = mark(s.decided);
      if (s.decided) decided.textContent += " (" + s.harvest + ")";
      // Trying the game on one laptop: each tab opened here holds one seat.
      var tab = el("a", S.try_seat, "try-seat");
      tab.href = "/console/seat/" + g.group + "/" + s.seat;
      tab.target = "_blank";
      tab.rel = "noopener";
      seats.appendChild(row([s.seat_id, s.short_code, phone, decided, s.points, tab], false));
    });
    card.appendChild(seats);

    var buttons = el("div", null, "buttons");
    var close = el("button", S.close_round);
    close.type = "button";
    close.disabled = state.status === "setup" || state.status === "ended" || g.waiting_for_block || g.session_over;
    close.addEventListener("click", function () { act("console_close_round", { group: g.group }); });
    var open = el("button", S.open_block);
    open.type = "button";
    open.disabled = !g.waiting_for_block;
    open.addEventListener("click", function () { act("console_open_block", { group: g.group }); });
    buttons.appendChild(close); buttons.appendChild(open);
    card.appendChild(buttons);

    card.appendChild(el("h3", S.results));
    if (!g.rounds.length) { card.appendChild(el("p", S.no_rounds, "quiet")); return card; }
    var results = el("table");
    results.appendChild(row([S.block, S.round, S.stock, S.asked, S.taken, S.left, S.after,
      S.crossed + " *", S.flip + " *"], true));
    g.rounds.slice().reverse().forEach(function (r) {
      // A seat that had not decided when the round was closed asked nothing: a dash, not 0.
      var asked = r.asked.map(function (a, i) { return r.sources[i] === "closed" ? "\u2013" : a; });
      results.appendChild(row([r.block, r.round, r.stock_before, asked.join(" "), r.taken.join(" "),
        r.remaining, r.stock_after + (r.end_reason ? " (" + S.ended_by + ": " + r.end_reason + ")" : ""),
        r.hidden.crossed ? S.yes : S.no, r.hidden.flip_draw], false));
    });
    var wrap = el("div", null, "table-wrap");
    wrap.appendChild(results);
    card.appendChild(wrap);
    card.appendChild(el("p", "* " + S.hidden, "quiet"));
    return card;
  }
})();
