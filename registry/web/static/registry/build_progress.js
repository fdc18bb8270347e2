// Follows a background build: polls its status every 1.5 s and updates the progress bar, the step,
// and (when finished) the link to the document or the error. Plain polling, no inline script; without
// JavaScript the page offers a refresh link instead.
(function () {
  "use strict";
  var box = document.getElementById("build");
  if (!box || !window.fetch) { return; }
  var url = box.getAttribute("data-status-url");
  var bar = document.getElementById("build-progress");
  var percent = document.getElementById("build-percent");
  var state = document.getElementById("build-state");
  var step = document.getElementById("build-step");
  var refresh = document.getElementById("build-refresh");
  var failures = 0;

  function show(s) {
    bar.value = s.percent;
    bar.textContent = s.percent + " %";
    percent.textContent = s.percent;
    state.textContent = s.state_words;
    state.className = "state state-build-" + s.state;
    step.textContent = s.step;
    if (s.state === "done") {
      var link = document.getElementById("build-link");
      link.href = s.document_url;
      link.textContent = "document " + s.document_code;
      document.getElementById("build-done").hidden = false;
    }
    if (s.state === "failed") {
      document.getElementById("build-error").textContent = s.error;
      document.getElementById("build-failed").hidden = false;
    }
    if (s.finished) { refresh.hidden = true; }
  }

  function poll() {
    fetch(url, { credentials: "same-origin", headers: { "Accept": "application/json" } })
      .then(function (r) { if (!r.ok) { throw new Error(r.status); } return r.json(); })
      .then(function (s) { failures = 0; show(s); if (!s.finished) { window.setTimeout(poll, 1500); } })
      .catch(function () { failures += 1; if (failures < 20) { window.setTimeout(poll, 3000); } });
  }
  window.setTimeout(poll, 800);
})();
