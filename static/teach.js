// The live teaching view: every few seconds, fetch each group's gauge (drawn on the server) and redraw.
(function () {
  "use strict";
  var S = JSON.parse(document.getElementById("teach-strings").textContent);
  var box = document.getElementById("teach-groups");
  var lastSeq = -1;
  var POLL_MS = 3000;
  function fmt(key, values) {
    return S[key].replace(/%\((\w+)\)s/g, function (_, n) { return values[n]; });
  }
  function draw(groups) {
    box.textContent = "";
    groups.forEach(function (g) {
      var card = document.createElement("section");
      card.className = "card teach-group";
      var h = document.createElement("h2");
      h.textContent = fmt("group", { id: g.group_id }) + " ";
      var where = document.createElement("span");
      where.className = "quiet";
      where.textContent = fmt("where", { b: g.block, r: g.round });
      h.appendChild(where);
      var gauge = document.createElement("div");
      gauge.className = "teach-gauge";
      gauge.innerHTML = g.svg;  // drawn and escaped by the server from participant views only
      card.appendChild(h); card.appendChild(gauge);
      box.appendChild(card);
    });
  }
  function poll() {
    fetch("/teach/gauges.json", { credentials: "same-origin", cache: "no-store" })
      .then(function (r) { return r.ok ? r.json() : null; })
      .then(function (data) {
        if (data && data.ok && data.seq !== lastSeq) { lastSeq = data.seq; draw(data.groups); }
      })
      .catch(function () {})
      .then(function () { window.setTimeout(poll, POLL_MS); });
  }
  window.setTimeout(poll, POLL_MS);
})();
