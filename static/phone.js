// The phone page: join with the seat secret, show the snapshot, send one harvest a round.
// Everything shown comes from the server's snapshot; texts come translated from the page.
(function () {
  "use strict";
  var S = JSON.parse(document.getElementById("phone-strings").textContent);
  var $ = function (id) { return document.getElementById(id); };
  var SVG_NS = "http://www.w3.org/2000/svg";

  function fmt(key, values) {
    return (S[key] || key).replace(/%\((\w+)\)s/g, function (_, name) {
      return values && name in values ? values[name] : "";
    }).replace(/%%/g, "%");
  }

  function randomId() {
    var bytes = new Uint8Array(12);
    window.crypto.getRandomValues(bytes);
    return Array.prototype.map.call(bytes, function (b) { return ("0" + b.toString(16)).slice(-2); }).join("");
  }

  function icon(name, cls) {
    var svg = document.createElementNS(SVG_NS, "svg");
    svg.setAttribute("class", "icon" + (cls ? " " + cls : ""));
    svg.setAttribute("aria-hidden", "true");
    var use = document.createElementNS(SVG_NS, "use");
    use.setAttribute("href", "#icon-" + name);
    svg.appendChild(use);
    return svg;
  }

  // sessionStorage first, so that browser tabs used as phones in a rehearsal keep their own seats.
  var secret = document.body.dataset.secret;
  var fresh = !!secret;  // straight from the seat card: may take back a seat the facilitator released
  if (secret) {
    sessionStorage.setItem("ebbtide.secret", secret);
    localStorage.setItem("ebbtide.secret", secret);
    history.replaceState(null, "", "/play");
  } else {
    secret = sessionStorage.getItem("ebbtide.secret") || localStorage.getItem("ebbtide.secret");
  }
  if (!secret) { $("join").hidden = false; return; }

  var device = localStorage.getItem("ebbtide.device");
  if (!device) { device = randomId(); localStorage.setItem("ebbtide.device", device); }
  var pendingKey = "ebbtide.pending." + secret.slice(0, 12);

  // Pictorial mode: remembered in this browser, so a reload or a new round keeps it.
  var pictorial = localStorage.getItem("ebbtide.pictorial") === "1";
  function applyMode() {
    document.body.classList.toggle("pictorial", pictorial);
    var toggle = $("picture-toggle");
    // Names the mode a tap switches to; it is an action, not a pressed state.
    toggle.textContent = pictorial ? S.show_words : S.show_pictures;
  }
  $("picture-toggle").hidden = false;
  $("picture-toggle").addEventListener("click", function () {
    pictorial = !pictorial;
    localStorage.setItem("ebbtide.pictorial", pictorial ? "1" : "0");
    applyMode();
    render();
  });
  applyMode();

  $("game").hidden = false;
  $("how-many").textContent = S.how_many;
  $("points-label").textContent = S.your_points;
  $("less").setAttribute("aria-label", S.less);
  $("more").setAttribute("aria-label", S.more);
  $("connection").textContent = S.connecting;
  $("talk-title").textContent = S.talk_title;
  $("talk-opens").textContent = S.talk_opens;

  var snap = null;
  var lastSeq = -1;
  var choice = null;  // nothing chosen yet: 0 is chosen on purpose, never by default
  // A choice the server acknowledged before any snapshot said so: the server holds this seat's
  // own "recorded" snapshot back a moment, and drops it when the group's result comes first.
  var acknowledged = null;
  var roundKey = "";
  var talkEndsAt = null;  // this phone's clock: when the talk pause ends
  var talkTimer = null;

  function pending() {
    try { return JSON.parse(localStorage.getItem(pendingKey)); } catch (e) { return null; }
  }
  function setPending(decision) {
    if (decision) localStorage.setItem(pendingKey, JSON.stringify(decision));
    else localStorage.removeItem(pendingKey);
  }

  var socket = io({ auth: { secret: secret, device: device, fresh: fresh } });
  // The field day's screens (phone-day.js) share this socket and these words.
  window.ebbtidePhone = { socket: socket, S: S, fmt: fmt, showProblem: showProblem };

  // The facilitator released this seat: forget it here; the card's link or code takes it back.
  function released(p) {
    sessionStorage.removeItem("ebbtide.secret");
    localStorage.removeItem("ebbtide.secret");
    setPending(null);
    socket.disconnect();
    $("game").hidden = true;
    $("join").hidden = false;
    var note = document.createElement("p");
    note.className = "notice notice-problem";
    note.setAttribute("role", "alert");
    note.textContent = S.seat_released || p.message;
    $("join").insertBefore(note, $("join").firstChild);
  }
  socket.on("seat_released", released);

  // A choice the server could not store (no answer, or server_error) stays pending here and is
  // sent again with the same id, waiting longer each time while connected; a resend is never
  // counted twice. On reconnect it is sent at once.
  var RETRY_FIRST_MS = 1000, RETRY_MAX_MS = 30000;
  var retryDelay = RETRY_FIRST_MS;
  var retryTimer = null;
  var retrying = false;

  function stopRetry() {
    if (retryTimer) window.clearTimeout(retryTimer);
    retryTimer = null;
    retryDelay = RETRY_FIRST_MS;
  }

  function retryLater(decision) {
    retrying = true;
    render();
    if (retryTimer) window.clearTimeout(retryTimer);
    retryTimer = window.setTimeout(function () {
      retryTimer = null;
      var still = pending();
      if (socket.connected && still && still.decision_id === decision.decision_id) send(still);
    }, retryDelay);
    retryDelay = Math.min(retryDelay * 2, RETRY_MAX_MS);
  }

  // Another phone holds this seat now: say so plainly, and take it over only when asked to.
  function offerTakeOver(message) {
    var box = $("take-over");
    if (!box) {
      box = document.createElement("div");
      box.id = "take-over";
      box.className = "card take-over";
      box.setAttribute("role", "alert");
      var text = document.createElement("p");
      text.className = "notice notice-problem";
      var button = document.createElement("button");
      button.type = "button";
      button.className = "primary wide";
      button.textContent = S.take_over;
      button.addEventListener("click", function () {
        box.hidden = true;
        socket.auth.take_over = true;
        socket.connect();
      });
      box.appendChild(text);
      box.appendChild(button);
      $("game").insertBefore(box, $("game").firstChild);
    }
    box.firstChild.textContent = message;
    box.hidden = false;
    $("connection").textContent = "";
  }
  socket.on("seat_taken", function () { offerTakeOver(S.seat_taken); });

  function send(decision) {
    socket.timeout(8000).emit("harvest", decision, function (err, ack) {
      var still = pending();
      if (!still || still.decision_id !== decision.decision_id) return;
      if (err || !ack || ack.code === "server_error") return retryLater(decision);
      stopRetry();
      retrying = false;
      setPending(null);
      if (!ack.ok) showProblem(ack);
      else if (!snap || snap.seq < ack.seq) {
        acknowledged = { seq: ack.seq, block: ack.block, round: ack.round, harvest: ack.harvest,
                         practice: !!decision.practice };
      }
      render();
    });
  }

  socket.on("connect", function () {
    socket.auth.take_over = false;  // asked once; a later reconnect asks again
    $("connection").textContent = "";
    stopRetry();
    var decision = pending();
    if (decision) send(decision);
  });
  socket.on("disconnect", function () {
    stopRetry();  // the next connect sends it again
    var box = $("take-over");
    if (!box || box.hidden) $("connection").textContent = S.offline;
  });
  socket.on("connect_error", function (err) {
    if (err && err.data && err.data.code === "seat_released") return released(err);
    if (err && err.data && err.data.code === "seat_in_use") return offerTakeOver(S.seat_in_use);
    $("connection").textContent = err && /seat card/.test(err.message) ? S.unknown_seat : S.offline;
  });
  socket.on("snapshot", function (s) {
    if (s.seq < lastSeq) return;  // an older picture arriving late changes nothing
    lastSeq = s.seq;
    if (acknowledged && s.seq >= acknowledged.seq) acknowledged = null;  // the server's word now
    snap = s;
    // The server sends seconds left (its clock); this phone counts down on its own.
    talkEndsAt = s.talk_remaining > 0 ? Date.now() + s.talk_remaining * 1000 : null;
    render();
  });
  socket.on("problem", function (p) {
    if (p.code !== "server_error") showProblem(p);  // that one is retried; the status line says so
  });

  function showProblem(p) {
    $("problem").textContent = fmt("problem", { message: p.message });
    $("problem").hidden = false;
  }

  function talkLeft() {
    return talkEndsAt === null ? 0 : Math.max(0, Math.ceil((talkEndsAt - Date.now()) / 1000));
  }

  // −5, −, +, +5: from no choice, a step down lands on 0 and a step up on the step's size.
  ["less5", "less", "more", "more5"].forEach(function (id) {
    $(id).addEventListener("click", function (e) {
      var step = Number(e.currentTarget.dataset.step);
      var max = snap ? snap.view.max_harvest : 0;
      choice = Math.max(0, Math.min(max, (choice === null ? 0 : choice) + step));
      renderChoice();
    });
  });
  $("confirm").addEventListener("click", function () {
    if (!snap || pending() || talkLeft() > 0 || choice === null) return;
    var v = snap.view;
    var decision = { decision_id: randomId(), block: v.block, round: v.round, harvest: choice,
                     practice: !!v.practice, language: document.documentElement.lang, pictures: pictorial };
    setPending(decision);
    retrying = false;
    $("problem").hidden = true;
    render();
    send(decision);
  });

  function buildPicker(max) {
    var box = $("unit-picker");
    if (box.dataset.max === String(max)) return;
    box.dataset.max = String(max);
    box.textContent = "";
    for (var n = 0; n <= max; n++) {
      var b = document.createElement("button");
      b.type = "button";
      b.className = "unit-button";
      b.dataset.n = String(n);
      b.setAttribute("aria-label", n === 0 ? S.take_none : fmt("take_n", { n: n }));
      b.appendChild(icon(n === 0 ? "none" : "unit"));
      var num = document.createElement("span");
      num.className = "unit-number";
      num.textContent = String(n);
      b.appendChild(num);
      b.addEventListener("click", function (e) {
        choice = Number(e.currentTarget.dataset.n);
        renderChoice();
      });
      box.appendChild(b);
    }
  }

  function renderChoice() {
    var max = snap ? snap.view.max_harvest : 0;
    var talking = talkLeft() > 0;
    var none = choice === null;
    $("choice").textContent = none ? "\u2013" : num(choice);
    $("less").disabled = $("less5").disabled = talking || choice === 0;
    $("more").disabled = $("more5").disabled = talking || choice >= max;
    $("confirm").disabled = talking || none;
    var words = none ? S.choose_first : fmt("confirm", { n: num(choice) });
    // Pictures mode: a tick and the number; the full words stay for screen readers.
    $("confirm").textContent = pictorial && !none ? "\u2713 " + num(choice) : words;
    $("confirm").setAttribute("aria-label", words);
    $("range").textContent = "0 – " + num(max) + " " + (snap ? snap.view.unit : "");
    buildPicker(max);
    Array.prototype.forEach.call($("unit-picker").children, function (b) {
      var n = Number(b.dataset.n);
      b.disabled = talking;
      b.classList.toggle("on", n > 0 && n <= choice);
      b.classList.toggle("chosen", n === choice);
      b.setAttribute("aria-pressed", n === choice ? "true" : "false");
    });
  }

  function renderTalk() {
    var left = talkLeft();
    $("talk-box").hidden = left <= 0;
    if (left > 0) {
      var m = Math.floor(left / 60), s = left % 60;
      $("talk-countdown").textContent = m + ":" + (s < 10 ? "0" : "") + s;
      $("talk-countdown").setAttribute("aria-label", fmt("talk_seconds_left", { seconds: left }));
    }
    if (left > 0 && talkTimer === null) {
      talkTimer = window.setInterval(function () {
        if (talkLeft() <= 0) { window.clearInterval(talkTimer); talkTimer = null; render(); }
        else renderTalk();
      }, 250);
    }
  }

  function dangerText(d) {
    if (d.kind === "vague") return S.danger_vague;
    if (d.kind === "range") return fmt("danger_range", { low: num(d.low), high: num(d.high) });
    if (d.kind === "exact") return fmt("danger_exact", { level: num(d.level) });
    if (d.kind === "risk") return fmt("danger_risk", { level: num(d.level), percent: Math.round(d.flip_probability * 100) });
    if (d.kind === "signal") return S.signal_note;
    return "";
  }

  function renderReasons(d) {
    var list = $("reasons");
    list.textContent = "";
    var reasons = d.kind === "signal" && d.reasons ? d.reasons : [];
    list.hidden = !reasons.length;
    if (!reasons.length) return;
    var intro = document.createElement("li");
    intro.className = "reason-intro";
    intro.textContent = S.reason_intro;
    list.appendChild(intro);
    reasons.forEach(function (r) {
      var li = document.createElement("li");
      li.textContent = S["reason_" + r] || r;
      list.appendChild(li);
    });
  }

  // Numbers as the page's language writes them ("40,4" in Spanish); the server sends plain digits.
  var numberFormat = new Intl.NumberFormat(document.documentElement.lang || undefined, { maximumFractionDigits: 2 });
  function num(value) {
    var n = Number(value);
    return isFinite(n) && String(value) !== "" ? numberFormat.format(n) : String(value);
  }

  // The first round of a new part says so (the stock starts again, the information may change);
  // a part that ended before its length says why.
  function renderBlockNews(v) {
    var text = "";
    if (v.block_over && v.block_end === "exhausted") text = S.block_end_exhausted;
    else if (v.block_over && v.block_end === "random stop") text = S.block_end_random;
    else if (!v.block_over && v.block > 1 && v.round === 1 && !v.last_round) {
      text = fmt("block_new", { block: v.block, stock: num(v.stock), unit: v.unit });
    }
    $("block-news").textContent = text;
    $("block-news").hidden = !text;
  }

  function fact(list, label, value) {
    var dt = document.createElement("dt"); dt.textContent = label;
    var dd = document.createElement("dd"); dd.textContent = value;
    list.appendChild(dt); list.appendChild(dd);
  }

  function picture(box, iconName, value, label, cls) {
    var row = document.createElement("div");
    row.className = "picture-fact" + (cls ? " " + cls : "");
    row.setAttribute("role", "group");
    row.setAttribute("aria-label", label + ": " + value);
    row.appendChild(icon(iconName));
    var num = document.createElement("span");
    num.className = "picture-number";
    num.textContent = value;
    row.appendChild(num);
    box.appendChild(row);
    return row;
  }

  function renderResult(last) {
    $("result").hidden = !last;
    if (!last) return;
    $("result-title").textContent = fmt("result_of_round", { round: last.round });
    var list = $("result-list");
    list.textContent = "";
    // A round the facilitator closed before this seat's choice arrived: not "you asked for 0".
    var unit = snap.view.unit;
    fact(list, S.you_asked, snap.missed_last_round ? S.no_choice : num(last.asked) + " " + unit);
    fact(list, S.you_got, fmt("got_points", { n: num(last.taken), unit: unit, points: num(last.points) }));
    if (last.others) fact(list, S.others_took, last.others.map(num).join(", "));
    fact(list, S.group_took, num(last.group_total) + " " + unit);
    fact(list, S.regrew, num(last.regrowth));
    fact(list, S.now_left, num(last.stock_after));
    $("others-note").textContent = S.others_none;
    $("others-note").hidden = !!last.others;

    var pics = $("result-pictures");
    pics.textContent = "";
    picture(pics, "me", last.taken, S.you_got, "picture-me");
    if (last.others) {
      var others = picture(pics, "other", last.others.join(" · "), S.others_took, "picture-others");
      others.dataset.others = last.others.join(",");
    }
    picture(pics, "group", last.group_total, S.group_took);
    picture(pics, "grow", "+" + last.regrowth, S.regrew);
    picture(pics, "stock", last.stock_after, S.now_left);
    $("rationed").textContent = S.rationed;
    $("rationed").hidden = !last.rationed;
  }

  var debriefPage = 0;
  function debriefPager(d) {
    var bar = document.createElement("div");
    bar.className = "debrief-pager";
    function step(label, arrow, to, id) {
      var b = document.createElement("button");
      b.type = "button";
      b.id = id;
      b.textContent = arrow;  // the words stay for screen readers and as a tooltip
      b.setAttribute("aria-label", label);
      b.title = label;
      b.disabled = to < 0 || to >= d.blocks.length;
      b.addEventListener("click", function () { debriefPage = to; renderDebrief(d); });
      return b;
    }
    var count = document.createElement("span");
    count.className = "pager-count";
    count.textContent = (debriefPage + 1) + " / " + d.blocks.length;
    bar.appendChild(step(S.debrief_previous, "\u2190", debriefPage - 1, "debrief-previous"));
    bar.appendChild(count);
    bar.appendChild(step(S.debrief_next, "\u2192", debriefPage + 1, "debrief-next"));
    return bar;
  }

  function renderDebrief(d) {
    $("debrief").hidden = !d;
    if (!d) return;
    $("debrief-title").textContent = S.debrief_title;
    var body = $("debrief-body");
    body.textContent = "";
    if (!d.blocks.length) {
      var none = document.createElement("p"); none.textContent = S.debrief_none; body.appendChild(none);
    }
    // One part a screen: a six-part debrief would otherwise be five phone screens long.
    debriefPage = Math.min(debriefPage, Math.max(0, d.blocks.length - 1));
    if (d.blocks.length > 1) body.appendChild(debriefPager(d));
    d.blocks.forEach(function (b, i) {
      if (i !== debriefPage) return;
      var h = document.createElement("h3");
      // The study's participant-facing label, if it gave one; never the researcher's block name.
      h.textContent = b.label ? fmt("debrief_part", { n: b.part, name: b.label }) : fmt("debrief_part_plain", { n: b.part });
      var chart = document.createElement("div");
      chart.className = "debrief-chart";
      chart.innerHTML = b.svg;  // drawn and escaped by the server, after the facilitator's reveal
      var level = document.createElement("p");
      if (b.threshold != null) {  // absent when the study has no danger level
        level.textContent = fmt("debrief_level", { level: num(b.threshold), recovery: num(b.recovery_level) }) + " " +
          (b.crossed_round ? fmt("debrief_crossed", { round: b.crossed_round }) : S.debrief_never);
      }
      var p = document.createElement("p");
      p.className = "sentence";
      p.textContent = b.sentence;
      body.appendChild(h); body.appendChild(level); body.appendChild(chart); body.appendChild(p);
    });
    $("debrief-caution").textContent = d.caution;
  }

  function render() {
    if (!snap) return;
    // Consent, instructions, questions, questionnaires and the end are the field day's screens.
    var dayScreen = window.ebbtideDay ? window.ebbtideDay.render(snap) : false;
    document.body.classList.toggle("day-screen", dayScreen);
    if (dayScreen) { $("status").textContent = ""; return; }
    var v = snap.view;
    $("seat-line").textContent = fmt("your_seat", { seat: v.seat, seats: v.seats }) + " · " +
      (v.rounds_in_block ? fmt("block_round_of", { block: v.block, blocks: v.blocks, round: v.round, rounds: v.rounds_in_block })
                         : fmt("block_round", { block: v.block, blocks: v.blocks, round: v.round }));
    $("block-label").textContent = v.block_label || "";
    $("block-label").hidden = !v.block_label;
    $("gauge").innerHTML = snap.gauge_svg;  // drawn on the server from this seat's view only
    var danger = dangerText(v.danger);
    $("danger").textContent = danger;
    $("danger").hidden = !danger;
    renderReasons(v.danger);
    $("points").textContent = num(v.points_total);
    $("points").setAttribute("aria-label", S.your_points + ": " + num(v.points_total));
    $("cash").hidden = snap.cash_so_far == null;
    if (snap.cash_so_far != null) $("cash").textContent = fmt("cash_so_far", { amount: num(snap.cash_so_far), currency: snap.currency });
    renderBlockNews(v);

    var key = (v.practice ? "practice." : "") + v.block + "." + v.round;
    if (key !== roundKey) { roundKey = key; choice = null; }
    var mine = pending();
    var status = "";
    var canChoose = false;
    if (snap.status === "ended" || v.session_over) status = S.session_over;
    else if (snap.status === "setup") status = S.not_started;
    else if (snap.status === "paused") status = S.paused;
    else if (snap.waiting_for_block || v.block_over) status = S.waiting_block;
    else if (snap.decided) status = fmt("recorded", { n: num(snap.my_harvest), unit: v.unit });
    else if (acknowledged && acknowledged.block === v.block && acknowledged.round === v.round &&
             acknowledged.practice === !!v.practice) {
      status = fmt("recorded", { n: num(acknowledged.harvest), unit: v.unit });
    }
    else if (mine) status = retrying ? S.retrying : S.sending;
    else canChoose = true;
    $("status").textContent = status;
    $("chooser").hidden = !canChoose;
    renderTalk();
    renderChoice();
    renderResult(v.last_round);
    renderDebrief(snap.debrief);
  }
})();
