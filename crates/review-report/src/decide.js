// Reviewer decisions: kept in this browser (localStorage) until exported as CSV.
// No network: the export is a download made from the page itself.
(function () {
  "use strict";
  var body = document.body;
  var sha = body.getAttribute("data-input-sha256") || "";
  var key = "ccm-triage-decisions:" + (sha || body.getAttribute("data-input-name") || "");
  var store = { reviewer: "", pairs: {} };
  try {
    var saved = JSON.parse(window.localStorage.getItem(key) || "null");
    if (saved && typeof saved === "object" && saved.pairs) { store = saved; }
  } catch (e) { /* unreadable storage: start empty */ }
  var boxes = Array.prototype.slice.call(document.querySelectorAll("fieldset.decide"));
  var id = function (box) { return box.getAttribute("data-driver") + "\u0000" + box.getAttribute("data-response"); };
  var reviewer = document.getElementById("reviewer");
  var count = document.getElementById("decision-count");

  function save() {
    try { window.localStorage.setItem(key, JSON.stringify(store)); } catch (e) { /* private mode */ }
    var n = Object.keys(store.pairs).length;
    if (count) { count.textContent = n + (n === 1 ? " decision" : " decisions") + " kept in this browser"; }
  }
  function show(box) {
    var d = store.pairs[id(box)];
    var radios = box.querySelectorAll("input[type=radio]");
    for (var i = 0; i < radios.length; i++) { radios[i].checked = !!d && radios[i].value === d.decision; }
    box.querySelector("input.note").value = d ? d.note : "";
  }
  function record(box) {
    var picked = box.querySelector("input[type=radio]:checked");
    var note = box.querySelector("input.note").value;
    if (!picked) { return; }
    store.pairs[id(box)] = {
      decision: picked.value, note: note, reviewer: store.reviewer,
      decided_at: new Date().toISOString()
    };
    save();
  }
  boxes.forEach(function (box) {
    // Decisions given to the run (--decisions) start the page when this browser has none.
    var given = box.getAttribute("data-given");
    if (given && !store.pairs[id(box)]) {
      store.pairs[id(box)] = {
        decision: given, note: box.getAttribute("data-given-note") || "",
        reviewer: box.getAttribute("data-given-reviewer") || "",
        decided_at: box.getAttribute("data-given-at") || ""
      };
    }
    show(box);
    box.addEventListener("change", function () { record(box); });
    box.querySelector("input.note").addEventListener("input", function () { record(box); });
  });
  if (reviewer) {
    reviewer.value = store.reviewer || "";
    reviewer.addEventListener("input", function () { store.reviewer = reviewer.value; save(); });
  }
  save();

  // CSV as the run's own files write it: RFC 4180 quoting, a leading ' before = + - @ tab CR.
  function cell(v) {
    var s = String(v);
    if (/^[=+\-@\t\r]/.test(s)) { s = "'" + s; }
    return /[",\r\n]/.test(s) ? '"' + s.replace(/"/g, '""') + '"' : s;
  }
  function csv() {
    var lines = ["driver,response,decision,note,reviewer,decided_at,input_sha256"];
    boxes.forEach(function (box) {
      var d = store.pairs[id(box)];
      if (!d) { return; }
      lines.push([box.getAttribute("data-driver"), box.getAttribute("data-response"), d.decision,
        d.note, d.reviewer || store.reviewer, d.decided_at, sha].map(cell).join(","));
    });
    return lines.join("\n") + "\n";
  }
  var exp = document.getElementById("export-decisions");
  if (exp) {
    exp.addEventListener("click", function () {
      var blob = new Blob([csv()], { type: "text/csv;charset=utf-8" });
      var a = document.createElement("a");
      a.href = URL.createObjectURL(blob);
      a.download = "decisions.csv";
      document.body.appendChild(a);
      a.click();
      document.body.removeChild(a);
      setTimeout(function () { URL.revokeObjectURL(a.href); }, 1000);
    });
  }
  var clear = document.getElementById("clear-decisions");
  if (clear) {
    clear.addEventListener("click", function () {
      if (!window.confirm("Forget every decision kept in this browser for this run?")) { return; }
      store.pairs = {};
      boxes.forEach(show);
      save();
    });
  }
})();
