// prespec registry site script: filters the index table by status and verdict, no server needed.
// The page reads in full without it; it only adds the filter controls and hides rows.
(function () {
  "use strict";
  var table = document.querySelector("main table");
  if (!table) { return; }
  var heads = Array.prototype.map.call(table.querySelectorAll("thead th"), function (th) {
    return th.textContent.trim();
  });
  var statusCol = heads.indexOf("Status");
  var verdictCols = [heads.indexOf("Check verdict"), heads.indexOf("Drift verdict")];
  var rows = Array.prototype.slice.call(table.querySelectorAll("tbody tr"));
  function cell(row, col) { return col < 0 ? "" : row.children[col].textContent.trim(); }
  function level(row) {
    var text = verdictCols.map(function (c) { return cell(row, c); }).join(" ");
    if (text.indexOf("\u2716") >= 0) { return "bad"; }
    if (text.indexOf("\u26A0") >= 0) { return "warn"; }
    return "good";
  }
  function select(label, name, options) {
    var wrap = document.createElement("label");
    wrap.textContent = label + " ";
    var box = document.createElement("select");
    box.name = name;
    options.forEach(function (pair) {
      var option = document.createElement("option");
      option.value = pair[0];
      option.textContent = pair[1];
      box.appendChild(option);
    });
    wrap.appendChild(box);
    return [wrap, box];
  }
  var statuses = [];
  rows.forEach(function (row) {
    var s = cell(row, statusCol);
    if (s && statuses.indexOf(s) < 0) { statuses.push(s); }
  });
  statuses.sort();
  var form = document.createElement("form");
  form.className = "filters";
  form.setAttribute("role", "search");
  var byStatus = select("Status", "status", [["", "any"]].concat(statuses.map(function (s) { return [s, s]; })));
  var byVerdict = select("Verdict", "verdict", [["", "any"], ["attention", "needs attention (\u2716 or \u26A0)"],
    ["bad", "\u2716 problems only"], ["good", "\u2714 ok and clean"]]);
  var count = document.createElement("output");
  count.setAttribute("aria-live", "polite");
  form.appendChild(byStatus[0]);
  form.appendChild(byVerdict[0]);
  form.appendChild(count);
  table.parentNode.parentNode.insertBefore(form, table.parentNode);
  function apply() {
    var shown = 0;
    rows.forEach(function (row) {
      var lv = level(row);
      var wanted = byVerdict[1].value;
      var ok = (!byStatus[1].value || cell(row, statusCol) === byStatus[1].value) &&
        (!wanted || wanted === lv || (wanted === "attention" && lv !== "good"));
      row.hidden = !ok;
      if (ok) { shown += 1; }
    });
    count.textContent = shown + " of " + rows.length + " shown";
  }
  form.addEventListener("change", apply);
  form.addEventListener("submit", function (event) { event.preventDefault(); });
  apply();
}());
