// The phone page: join with the seat secret, show the snapshot, send one harvest a round.
// Everything shown comes from the server's snapshot; texts come translated from the page.
(function () {
  "use strict";
  var S = JSON.parse(document.getElementById("phone-strings").textContent);
  var $ = function (id) { return document.getElementById(id); };

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

  $("game").hidden = false;
  $("stock-label").textContent = S.stock;
  $("how-many").textContent = S.how_many;
  $("points-label").textContent = S.your_points;
  $("less").setAttribute("aria-label", S.less);
  $("more").setAttribute("aria-label", S.more);
  $("connection").textContent = S.connecting;

  var snap = null;
  var lastSeq = -1;
  var choice = 0;
  var roundKey = "";

  function pending() {
    try { return JSON.parse(localStorage.getItem(pendingKey)); } catch (e) { return null; }
  }
  function setPending(decision) {
    if (decision) localStorage.setItem(pendingKey, JSON.stringify(decision));
    else localStorage.removeItem(pendingKey);
  }

  var socket = io({ auth: { secret: secret, device: device, fresh: fresh } });

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

  function send(decision) {
    socket.timeout(8000).emit("harvest", decision, function (err, ack) {
      if (err) return;  // no answer: it is resent on the next connect, with the same id
      var still = pending();
      if (still && still.decision_id === decision.decision_id) setPending(null);
      if (!ack.ok) showProblem(ack);
      render();
    });
  }

  socket.on("connect", function () {
    $("connection").textContent = "";
    var decision = pending();
    if (decision) send(decision);
  });
  socket.on("disconnect", function () { $("connection").textContent = S.offline; });
  socket.on("connect_error", function (err) {
    if (err && err.data && err.data.code === "seat_released") return released(err);
    $("connection").textContent = err && /seat card/.test(err.message) ? S.unknown_seat : S.offline;
  });
  socket.on("snapshot", function (s) {
    if (s.seq < lastSeq) return;  // an older picture arriving late changes nothing
    lastSeq = s.seq;
    snap = s;
    render();
  });
  socket.on("problem", showProblem);

  function showProblem(p) {
    $("problem").textContent = fmt("problem", { message: p.message });
    $("problem").hidden = false;
  }

  $("less").addEventListener("click", function () { choice = Math.max(0, choice - 1); renderChoice(); });
  $("more").addEventListener("click", function () {
    choice = Math.min(snap ? snap.view.max_harvest : 0, choice + 1); renderChoice();
  });
  $("confirm").addEventListener("click", function () {
    if (!snap || pending()) return;
    var v = snap.view;
    var decision = { decision_id: randomId(), block: v.block, round: v.round, harvest: choice };
    setPending(decision);
    $("problem").hidden = true;
    render();
    send(decision);
  });

  function renderChoice() {
    var max = snap ? snap.view.max_harvest : 0;
    $("choice").textContent = choice;
    $("less").disabled = choice <= 0;
    $("more").disabled = choice >= max;
    $("confirm").textContent = fmt("confirm", { n: choice });
    $("range").textContent = "0 – " + max + " " + (snap ? snap.view.unit : "");
  }

  function dangerText(d) {
    if (d.kind === "vague") return S.danger_vague;
    if (d.kind === "range") return fmt("danger_range", { low: d.low, high: d.high });
    if (d.kind === "exact") return fmt("danger_exact", { level: d.level });
    if (d.kind === "risk") return fmt("danger_risk", { level: d.level, percent: Math.round(d.flip_probability * 100) });
    if (d.kind === "signal") return fmt("signal", { band: S["band_" + d.band], trend: S["trend_" + d.trend] });
    return "";
  }

  function fact(list, label, value) {
    var dt = document.createElement("dt"); dt.textContent = label;
    var dd = document.createElement("dd"); dd.textContent = value;
    list.appendChild(dt); list.appendChild(dd);
  }

  function render() {
    if (!snap) return;
    var v = snap.view;
    $("seat-line").textContent = fmt("your_seat", { seat: v.seat, seats: v.seats }) + " · " +
      (v.rounds_in_block ? fmt("block_round_of", { block: v.block, blocks: v.blocks, round: v.round, rounds: v.rounds_in_block })
                         : fmt("block_round", { block: v.block, blocks: v.blocks, round: v.round }));
    $("stock").textContent = v.stock;
    $("unit").textContent = v.unit;
    $("stock-meter").max = v.capacity;
    $("stock-meter").value = v.stock;
    var danger = dangerText(v.danger);
    $("danger").textContent = danger;
    $("danger").hidden = !danger;
    $("talk").textContent = v.talk ? fmt("talk", { seconds: v.talk_seconds }) : "";
    $("talk").hidden = !v.talk;
    $("points").textContent = v.points_total;

    var key = v.block + "." + v.round;
    if (key !== roundKey) { roundKey = key; choice = 0; }
    var mine = pending();
    var status = "";
    var canChoose = false;
    if (snap.status === "ended" || v.session_over) status = S.session_over;
    else if (snap.status === "setup") status = S.not_started;
    else if (snap.status === "paused") status = S.paused;
    else if (snap.waiting_for_block || v.block_over) status = S.waiting_block;
    else if (snap.decided) status = fmt("recorded", { n: snap.my_harvest });
    else if (mine) status = S.sending;
    else canChoose = true;
    $("status").textContent = status;
    $("chooser").hidden = !canChoose;
    renderChoice();

    var last = v.last_round;
    $("result").hidden = !last;
    if (last) {
      $("result-title").textContent = S.last_round + " (" + last.round + ")";
      var list = $("result-list");
      list.textContent = "";
      fact(list, S.you_asked, last.asked);
      fact(list, S.you_got, last.taken + " (+" + last.points + ")");
      if (last.others) fact(list, S.others_took, last.others.join(", "));
      fact(list, S.group_took, last.group_total);
      fact(list, S.regrew, last.regrowth);
      fact(list, S.now_left, last.stock_after);
      $("rationed").textContent = S.rationed;
      $("rationed").hidden = !last.rationed;
    }
  }
})();
