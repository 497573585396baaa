/* scanmass bench page: remember the settings on this device, upload with progress, wait for the result. */
(function () {
  "use strict";

  // The access token came in the first address; the cookie carries it from now on.
  if (window.location.search.indexOf("token=") !== -1 && window.history.replaceState) {
    window.history.replaceState(null, "", window.location.pathname);
  }

  var STORE_KEY = "scanmass-settings";

  function loadSettings() {
    try { return JSON.parse(window.localStorage.getItem(STORE_KEY) || "{}"); } catch (e) { return {}; }
  }

  function saveSettings(form) {
    var data = {};
    form.querySelectorAll("[data-remember]").forEach(function (el) { data[el.name] = el.value; });
    try { window.localStorage.setItem(STORE_KEY, JSON.stringify(data)); } catch (e) { /* private mode */ }
  }

  function showScaleFields(form) {
    var scale = form.querySelector("#scale").value;
    form.querySelectorAll(".when-mat").forEach(function (el) { el.hidden = !(scale === "mat" || scale === "auto"); });
    form.querySelectorAll(".when-sheet").forEach(function (el) { el.hidden = scale !== "sheet"; });
    form.querySelectorAll(".when-dpi").forEach(function (el) { el.hidden = scale !== "dpi"; });
  }

  function setupUpload(form) {
    var saved = loadSettings();
    form.querySelectorAll("[data-remember]").forEach(function (el) {
      if (Object.prototype.hasOwnProperty.call(saved, el.name)) { el.value = saved[el.name]; }
      el.addEventListener("change", function () { saveSettings(form); showScaleFields(form); });
    });
    showScaleFields(form);
    var bar = document.getElementById("progress");
    var status = document.getElementById("status");
    var send = document.getElementById("send");
    form.addEventListener("submit", function (ev) {
      ev.preventDefault();
      saveSettings(form);
      var photo = document.getElementById("photo");
      if (!photo.files || !photo.files.length) { status.textContent = "Take or choose a photo first."; return; }
      var xhr = new XMLHttpRequest();
      xhr.open("POST", form.getAttribute("action"));
      xhr.setRequestHeader("Accept", "application/json");
      bar.hidden = false; bar.value = 0; send.disabled = true;
      status.textContent = "Uploading…";
      xhr.upload.addEventListener("progress", function (e) {
        if (e.lengthComputable) { bar.value = Math.round(100 * e.loaded / e.total); }
      });
      xhr.addEventListener("load", function () {
        var doc = null;
        try { doc = JSON.parse(xhr.responseText); } catch (e) { doc = null; }
        if (xhr.status === 202 && doc && doc.url) {
          status.textContent = "Uploaded; measuring…";
          window.location.assign(doc.url);
          return;
        }
        send.disabled = false; bar.hidden = true;
        var msg = (doc && doc.error) || ("The upload failed (" + xhr.status + ").");
        if (xhr.status === 429) {
          var wait = xhr.getResponseHeader("Retry-After");
          if (wait) { msg += " Try again in " + wait + " s."; }
        }
        status.textContent = msg;
      });
      xhr.addEventListener("error", function () {
        send.disabled = false; bar.hidden = true;
        status.textContent = "The upload failed: the server cannot be reached.";
      });
      xhr.send(new FormData(form));
    });
  }

  function watchJob(card) {
    var id = card.getAttribute("data-job");
    var text = document.getElementById("job-status");
    function poll() {
      var xhr = new XMLHttpRequest();
      xhr.open("GET", "/api/jobs/" + encodeURIComponent(id));
      xhr.setRequestHeader("Accept", "application/json");
      xhr.addEventListener("load", function () {
        var doc = null;
        try { doc = JSON.parse(xhr.responseText); } catch (e) { doc = null; }
        if (!doc || xhr.status !== 200) { window.setTimeout(poll, 2000); return; }
        if (doc.status === "done" || doc.status === "failed") { window.location.reload(); return; }
        if (text) {
          text.textContent = doc.status === "queued"
            ? "Waiting for a worker" + (doc.ahead ? " (" + doc.ahead + " ahead)" : "") + "…"
            : "Measuring…";
        }
        window.setTimeout(poll, 300);
      });
      xhr.addEventListener("error", function () { window.setTimeout(poll, 2000); });
      xhr.send();
    }
    window.setTimeout(poll, 300);
  }

  document.addEventListener("DOMContentLoaded", function () {
    var form = document.getElementById("upload");
    if (form) { setupUpload(form); }
    var card = document.getElementById("job");
    if (card) {
      var st = card.getAttribute("data-status");
      if (st === "queued" || st === "running") { watchJob(card); }
    }
  });
}());
