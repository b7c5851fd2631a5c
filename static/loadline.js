// Loadline's only script. Every page works without it: links and forms are plain HTML. With it,
// htmx swaps the plan fragment in place after each change, and this file makes that feel like
// one continuous sheet: the keyboard stays where the person is typing, nothing typed while the
// plan is being re-solved is lost, and the quick-add row is driven by Enter.
(function () {
  "use strict";

  function csrfToken() {
    var meta = document.querySelector('meta[name="csrf-token"]');
    return meta ? meta.getAttribute("content") : "";
  }

  document.addEventListener("htmx:configRequest", function (event) {
    event.detail.headers["X-CSRF-Token"] = csrfToken();
  });

  // A refused value (422), an edit based on an old version (409) and "nothing left to undo"
  // (404) come back as the plan with the message beside the field: show them like a success.
  var SHOWN_STATUSES = [404, 409, 422];
  document.addEventListener("htmx:beforeSwap", function (event) {
    if (SHOWN_STATUSES.indexOf(event.detail.xhr.status) >= 0) {
      event.detail.shouldSwap = true;
      event.detail.isError = false;
    }
  });

  function inPlan(el) {
    return Boolean(el && el.closest && el.closest("#plan"));
  }

  function isField(el) {
    return Boolean(el && el.id && /^(INPUT|SELECT|TEXTAREA)$/.test(el.tagName) && el.type !== "hidden");
  }

  function isDirty(el) {
    if (el.tagName === "SELECT") {
      return Array.prototype.some.call(el.options, function (o) {
        return o.selected !== o.defaultSelected;
      });
    }
    return el.value !== el.defaultValue;
  }

  // --- While the plan is being re-solved -----------------------------------------------------
  // Fields carry stable ids (effort-12, value-12, state-12, quick-title), so after a swap the
  // same field is found again, even when its row moved to the other group. A form submitted
  // while a request is on its way waits for the swap and is then sent from the new page, so
  // it carries the new version of its row.
  var busy = false;
  var waiting = []; // ids of forms to submit after the swap
  var typed = {}; // field id -> value typed but not yet part of the page
  var kept = null; // where the focus was when the swap started
  var planSwap = false; // the swap replaces the whole plan fragment

  document.addEventListener("htmx:beforeRequest", function (event) {
    if (inPlan(event.detail.elt)) {
      busy = true;
    }
  });
  ["htmx:sendError", "htmx:timeout", "htmx:responseError"].forEach(function (name) {
    document.addEventListener(name, function () {
      busy = false;
    });
  });

  document.addEventListener(
    "submit",
    function (event) {
      var form = event.target;
      if (busy && inPlan(form)) {
        event.preventDefault();
        event.stopImmediatePropagation();
        if (form.id && waiting.indexOf(form.id) < 0) {
          waiting.push(form.id);
        }
      }
    },
    true
  );

  document.addEventListener("htmx:beforeSwap", function (event) {
    planSwap = Boolean(event.detail.target && event.detail.target.id === "plan");
    if (!planSwap) {
      return;
    }
    var sender = event.detail.requestConfig ? event.detail.requestConfig.elt : null;
    var sentForm = sender && sender.tagName === "FORM" ? sender : sender && sender.form;
    typed = {};
    document.querySelectorAll("#plan input, #plan select, #plan textarea").forEach(function (el) {
      // The sending form's fields are answered by the response itself.
      if (isField(el) && el.form !== sentForm && isDirty(el)) {
        typed[el.id] = el.value;
      }
    });
    var active = document.activeElement;
    kept = null;
    if (isField(active)) {
      var text = active.tagName !== "SELECT";
      kept = {
        id: active.id,
        start: text ? active.selectionStart : null,
        end: text ? active.selectionEnd : null,
      };
    }
  });

  function saveOnLeave(el) {
    el.addEventListener(
      "blur",
      function () {
        if (el.isConnected && isDirty(el)) {
          el.dispatchEvent(new Event("change", { bubbles: true }));
        }
      },
      { once: true }
    );
  }

  function restoreFocus() {
    var wanted = document.querySelector("#plan [autofocus]");
    var el = kept ? document.getElementById(kept.id) : null;
    var target = wanted || el;
    if (!target || typeof target.focus !== "function") {
      return;
    }
    target.focus({ preventScroll: !wanted });
    if (wanted) {
      wanted.removeAttribute("autofocus"); // once: a later swap of a part must not jump here
    }
    if (target === el && kept.start !== null && typeof el.setSelectionRange === "function") {
      try {
        el.setSelectionRange(kept.start, kept.end);
      } catch (ignored) {
        // Some input types have no selection; the focus alone is enough.
      }
    }
    if (wanted && wanted.tagName === "INPUT" && typeof wanted.select === "function") {
      wanted.select();
    }
  }

  document.addEventListener("htmx:afterSettle", function () {
    if (!planSwap) {
      return;
    }
    planSwap = false;
    busy = false;
    Object.keys(typed).forEach(function (id) {
      var el = document.getElementById(id);
      if (el && !isDirty(el) && el.value !== typed[id]) {
        el.value = typed[id];
        saveOnLeave(el);
      }
    });
    typed = {};
    restoreFocus();
    kept = null;
    var next = waiting.shift();
    var form = next ? document.getElementById(next) : null;
    var changed =
      form &&
      Array.prototype.some.call(form.elements, function (el) {
        return isField(el) && isDirty(el);
      });
    if (changed && typeof form.requestSubmit === "function") {
      form.requestSubmit();
    }
  });

  // --- Editing a row -------------------------------------------------------------------------
  // A changed field saves its row (the form the field belongs to); Enter saves at once.
  function rowForm(el) {
    var form = el && el.form;
    return form && form.classList.contains("row-edit") && inPlan(form) ? form : null;
  }

  document.addEventListener("change", function (event) {
    var form = rowForm(event.target);
    if (form) {
      form.requestSubmit();
    }
  });

  // --- Explanations of large plans ----------------------------------------------------------
  // Large plans leave each row's explanation out of the page (a link to it stands in); opening
  // the row's "Why" fetches it into place.
  document.addEventListener(
    "toggle",
    function (event) {
      var details = event.target;
      var link = details.open && details.querySelector ? details.querySelector(".explain-link") : null;
      if (link && window.htmx) {
        // No source inside the plan: this fetch must not cancel a change on its way.
        window.htmx.ajax("GET", link.getAttribute("href"), {
          target: link.parentNode,
          swap: "innerHTML",
        });
      }
    },
    true
  );

  // --- Quick-add row -------------------------------------------------------------------------
  // Enter moves on to the next empty field of the row; when the row is complete, Enter saves
  // it and the answer brings a fresh empty row with the focus in its title (autofocus).
  // Without this script Enter saves at once and a missing field is reported beside it.
  var QUICK_FIELDS = ["quick-title", "quick-effort", "quick-value"];

  document.addEventListener("keydown", function (event) {
    var el = event.target;
    if (event.key !== "Enter" || event.isComposing || !el || el.tagName !== "INPUT") {
      return;
    }
    var form = rowForm(el);
    if (form) {
      // Save once, here: without this the browser's own submit would follow the change event.
      event.preventDefault();
      form.requestSubmit();
      return;
    }
    var at = QUICK_FIELDS.indexOf(el.id);
    if (at < 0) {
      return;
    }
    if (!el.value.trim()) {
      event.preventDefault();
      return;
    }
    for (var i = 0; i < QUICK_FIELDS.length; i += 1) {
      var field = document.getElementById(QUICK_FIELDS[i]);
      if (i !== at && field && !field.value.trim()) {
        event.preventDefault();
        field.focus();
        return;
      }
    }
  });
})();
