// Loadline's only script. Every page works without it: links and forms are plain HTML. With it,
// htmx swaps the plan fragment in place after each change, and this file makes that feel like
// one continuous sheet: the keyboard stays where the person is typing, nothing typed while the
// plan is being re-solved is lost, each change of a row is saved once, and the quick-add row is
// driven by Enter.
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
  // An error of any status answered as a fragment (a deleted row's message, the plan's alert)
  // carries a header saying so, and goes where the server said (HX-Retarget).
  var SHOWN_STATUSES = [404, 409, 422];
  function isErrorFragment(xhr) {
    return Boolean(xhr && xhr.getResponseHeader("Loadline-Error-Fragment"));
  }

  document.addEventListener("htmx:beforeSwap", function (event) {
    var xhr = event.detail.xhr;
    if (SHOWN_STATUSES.indexOf(xhr.status) >= 0 || isErrorFragment(xhr)) {
      event.detail.shouldSwap = true;
      event.detail.isError = false;
    }
  });

  // A refusal (403: the role may not make this change, or the form's token has expired) stores
  // nothing and is not swapped in: its message goes beside the form that asked, in the row's
  // save cell for a row, so it is never lost. What was typed stays in the fields.
  function refusalSpot(elt) {
    var form = elt && elt.tagName === "FORM" ? elt : elt && elt.form;
    var source = form || elt;
    if (!source || !source.closest) {
      return null;
    }
    var row = source.closest("tr");
    return (row && row.querySelector(".col-save")) || source;
  }

  document.addEventListener("htmx:beforeSwap", function (event) {
    var xhr = event.detail.xhr;
    if (xhr.status !== 403) {
      return;
    }
    var config = event.detail.requestConfig;
    var elt = config ? config.elt : event.detail.elt;
    var spot = refusalSpot(elt);
    if (!spot) {
      return;
    }
    // Shown here, so not an error for htmx to log; the request is over all the same.
    event.detail.shouldSwap = false;
    event.detail.isError = false;
    unanswered(elt);
    var note = spot.querySelector(".refusal");
    if (!note) {
      note = document.createElement("p");
      note.className = "field-error refusal";
      note.setAttribute("role", "alert");
      spot.appendChild(note);
    }
    note.textContent = (xhr.responseText || "").trim().slice(0, 500) || "This change was refused.";
  });

  function inPlan(el) {
    return Boolean(el && el.closest && el.closest("#plan"));
  }

  function isPlan(el) {
    return Boolean(el && el.id === "plan");
  }

  function isField(el) {
    return Boolean(el && el.id && /^(INPUT|SELECT|TEXTAREA)$/.test(el.tagName) && el.type !== "hidden");
  }

  // htmx puts the new plan in before it takes the old one out, and the old fields fire "change"
  // and "blur" on their way out: only the page's own element of an id speaks for that id.
  function isCurrent(el) {
    return Boolean(el && el.isConnected && (!el.id || document.getElementById(el.id) === el));
  }

  function isDirty(el) {
    if (el.tagName === "SELECT") {
      return Array.prototype.some.call(el.options, function (o) {
        return o.selected !== o.defaultSelected;
      });
    }
    return el.value !== el.defaultValue;
  }

  function fieldsOf(form) {
    return Array.prototype.filter.call(form.elements, isField);
  }

  function hasDirtyField(form) {
    return fieldsOf(form).some(isDirty);
  }

  function isRowForm(el) {
    return Boolean(el && el.tagName === "FORM" && el.classList.contains("row-edit"));
  }

  // The row form a field (or the form itself) belongs to, if it is the page's current one.
  function rowForm(el) {
    var form = el && el.tagName === "FORM" ? el : el && el.form;
    return isCurrent(el) && isRowForm(form) && inPlan(form) && isCurrent(form) ? form : null;
  }

  // --- While the plan is being re-solved -----------------------------------------------------
  // Fields carry stable ids (effort-12, value-12, state-12, quick-title), so after a swap the
  // same field is found again, even when its row moved to the other group. htmx wires the new
  // plan's forms only when it settles, so anything submitted from the moment a request leaves
  // until then waits, and is sent from the settled page with the new version of its row.
  var busy = false;
  var pending = []; // {id, row, asked}: forms to submit once the plan has settled
  var typed = {}; // field id -> value typed but not yet part of the page
  var kept = null; // where the focus was when the swap started
  var quickCarry = null; // the quick-add row as sent and as typed on since (carryQuick)
  var releasing = null; // the form this script is submitting itself, let through to htmx

  function later(id, row, asked) {
    var entry = pending.filter(function (e) {
      return e.id === id;
    })[0];
    if (entry) {
      entry.asked = entry.asked || asked;
    } else if (id) {
      pending.push({ id: id, row: row, asked: asked });
    }
  }

  function submit(form) {
    if (typeof form.requestSubmit !== "function") {
      return;
    }
    releasing = form;
    try {
      form.requestSubmit();
    } finally {
      releasing = null;
    }
  }

  // --- Saving a row --------------------------------------------------------------------------
  // Every way of saving a row ends in saveRow: Enter, leaving a changed field, the Save button,
  // a save asked for while the plan was busy, a value put back after a swap. It saves what the
  // row holds now, from the current page, and only when that differs both from what the page
  // shows as stored and from what was last sent. "asked" is Enter or a button: it also sends a
  // row the answer left unsaved (a clash with someone else's edit), once per version.
  var sent = {}; // row form id -> {key, values} of the row's last save sent

  // What a save of the row would send, buttons and token aside: fields, version, what-if.
  function rowKey(form) {
    return Array.prototype.filter
      .call(form.elements, function (el) {
        var sendable = /^(INPUT|SELECT|TEXTAREA)$/.test(el.tagName) && el.type !== "submit";
        return sendable && el.name && el.name !== "csrf_token";
      })
      .map(function (el) {
        return el.name + "=" + el.value;
      })
      .join("&");
  }

  function rowValues(form) {
    var values = {};
    fieldsOf(form).forEach(function (el) {
      values[el.id] = el.value;
    });
    return values;
  }

  function isUnsaved(form) {
    var row = form.closest("tr");
    return Boolean(row && row.classList.contains("row-refused"));
  }

  function needsSave(form, asked) {
    var last = sent[form.id];
    if (last && last.key === rowKey(form)) {
      return false;
    }
    return hasDirtyField(form) || (asked && isUnsaved(form));
  }

  // Judged twice when the plan is busy: now, so that leaving a field whose value is already on
  // its way asks for nothing, and again on the settled page, which may hold newer values.
  // Called from the row's own submit event ("submitting"), it sends by letting that event go
  // on to htmx: a form cannot be submitted again while its submit event is being dispatched.
  function saveRow(form, asked, submitting) {
    if (!form || !needsSave(form, asked)) {
      return false;
    }
    if (busy) {
      later(form.id, true, asked);
      return false;
    }
    if (!submitting) {
      submit(form);
    }
    return true;
  }

  // "Pin it" and the like name the state to set: the same as choosing it in the row's field.
  function chooseState(form, button) {
    if (!button || button.name !== "set_state") {
      return;
    }
    fieldsOf(form).forEach(function (el) {
      if (el.name === "state") {
        el.value = button.value;
      }
    });
  }

  function sendPending() {
    var queue = pending;
    pending = [];
    queue.forEach(function (entry) {
      var form = document.getElementById(entry.id);
      if (!form || form.tagName !== "FORM") {
        return;
      }
      if (entry.row) {
        saveRow(rowForm(form), entry.asked);
      } else if (busy) {
        later(entry.id, false, false);
      } else if (hasDirtyField(form)) {
        submit(form);
      }
    });
  }

  document.addEventListener("htmx:beforeRequest", function (event) {
    var elt = event.detail.elt;
    if (!inPlan(elt)) {
      return;
    }
    busy = true;
    if (isRowForm(elt)) {
      sent[elt.id] = { key: rowKey(elt), values: rowValues(elt) };
    } else if (elt.id === "quick-form") {
      sent[elt.id] = { key: null, values: rowValues(elt) };
    }
  });

  // A save that got no answer (or a refusal) was not stored: the same values may be sent again.
  function unanswered(elt) {
    if (isRowForm(elt)) {
      delete sent[elt.id];
    }
    if (inPlan(elt)) {
      busy = false;
      sendPending();
    }
  }

  ["htmx:sendError", "htmx:timeout", "htmx:responseError"].forEach(function (name) {
    document.addEventListener(name, function (event) {
      unanswered(event.detail.elt);
    });
  });
  // A newer request replaced it (a link, a view change): try again once that one has settled.
  document.addEventListener("htmx:sendAbort", function (event) {
    var elt = event.detail.elt;
    if (isRowForm(elt)) {
      delete sent[elt.id];
      later(elt.id, true, false);
    }
  });

  document.addEventListener(
    "submit",
    function (event) {
      var form = event.target;
      if (form === releasing || !inPlan(form)) {
        return;
      }
      if (isRowForm(form)) {
        var current = rowForm(form);
        if (current) {
          chooseState(current, event.submitter);
        }
        if (!saveRow(current, true, true)) {
          event.preventDefault();
          event.stopImmediatePropagation();
        }
      } else if (busy) {
        event.preventDefault();
        event.stopImmediatePropagation();
        later(form.id, false, false);
      }
    },
    true
  );

  document.addEventListener("htmx:beforeSwap", function (event) {
    if (!isPlan(event.detail.target) || !event.detail.shouldSwap) {
      return;
    }
    var sender = event.detail.requestConfig ? event.detail.requestConfig.elt : null;
    var sentForm = sender && sender.tagName === "FORM" ? sender : sender && sender.form;
    var last = sentForm ? sent[sentForm.id] : null;
    typed = {};
    quickCarry = null;
    if (last && sentForm.id === "quick-form") {
      quickCarry = { sent: last.values, now: rowValues(sentForm) };
    }
    document.querySelectorAll("#plan input, #plan select, #plan textarea").forEach(function (el) {
      if (!isField(el)) {
        return;
      }
      if (quickCarry && el.form === sentForm) {
        return; // see carryQuick
      }
      if (el.form && el.form === sentForm) {
        // The answer shows what was sent; keep only what was typed into the row since.
        if (last && el.value !== last.values[el.id]) {
          typed[el.id] = el.value;
        }
      } else if (isDirty(el)) {
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
        // In another form than the one answered: the person has moved on, and the answer's
        // own focus (a refused field, a clash) must not pull the next keystrokes back there.
        elsewhere: Boolean(sentForm) && active.form !== sentForm,
      };
    } else if (active && active !== document.body && inPlan(active)) {
      // A what-if link or a state button: it is gone after the swap, so the focus goes to
      // its row (or the plan's figures), not back to the top of the page.
      var row = active.closest("tr.plan-row");
      kept = { id: null, row: row ? row.id : null, start: null, end: null };
    }
  });

  // Where the focus goes when the element that had it is gone: the row's "Why" summary, or
  // its title, or the plan's figures.
  function keptPlace() {
    var row = kept && kept.row ? document.getElementById(kept.row) : null;
    var place = row ? row.querySelector("details.why summary") || row.querySelector("th") : null;
    place = place || document.getElementById("summary-h");
    if (place && !place.matches("summary, a, button, input, select, textarea")) {
      place.setAttribute("tabindex", "-1");
    }
    return place;
  }

  function saveOnLeave(el) {
    el.addEventListener(
      "blur",
      function () {
        saveRow(rowForm(el), false);
      },
      { once: true }
    );
  }

  // Put typed values into the new fields; a field left already is saved with its row, the one
  // still being typed in when the person leaves it (or presses Enter).
  function putBackTyped() {
    Object.keys(typed).forEach(function (id) {
      var el = document.getElementById(id);
      if (!el || isDirty(el) || el.value === typed[id]) {
        return;
      }
      el.value = typed[id];
      if (kept && kept.id === id) {
        saveOnLeave(el);
      } else {
        saveRow(rowForm(el), false);
      }
    });
    typed = {};
  }

  // The quick-add row was sent with Enter and the person typed on: into its fields, before the
  // answer came. Added (the answer brings an empty row): what was typed since begins the next
  // title. Refused (the answer holds the values sent): the fields as the person left them.
  function extraTyped(before, now) {
    return now.indexOf(before) === 0 ? now.slice(before.length) : now;
  }

  function carryQuick() {
    var carry = quickCarry;
    quickCarry = null;
    var title = document.getElementById("quick-title");
    if (!carry || !title) {
      return;
    }
    var added = title.value === "" && carry.sent["quick-title"] !== "";
    if (!added) {
      Object.keys(carry.now).forEach(function (id) {
        var el = document.getElementById(id);
        if (el && carry.now[id] !== carry.sent[id]) {
          el.value = carry.now[id];
        }
      });
      return;
    }
    var extra = Object.keys(carry.now)
      .map(function (id) {
        return carry.now[id] === carry.sent[id] ? "" : extraTyped(carry.sent[id] || "", carry.now[id]);
      })
      .join("");
    if (extra) {
      title.value = extra;
      title.removeAttribute("autofocus"); // its select() would let the next key replace it
      kept = { id: title.id, start: extra.length, end: extra.length, elsewhere: false };
    }
  }

  // Right after the swap, in the same task, so nothing the person types or selects next is
  // undone: htmx's own autofocus would come at settle time, so the attribute goes here.
  function restoreFocus() {
    var wanted = document.querySelector("#plan [autofocus]");
    var el = kept && kept.id ? document.getElementById(kept.id) : null;
    if (wanted) {
      wanted.removeAttribute("autofocus"); // once: a later swap of a part must not jump here
      if (el && kept.elsewhere) {
        wanted = null;
      }
    }
    var target = wanted || el || (kept ? keptPlace() : null);
    if (!target || typeof target.focus !== "function") {
      return;
    }
    target.focus({ preventScroll: !wanted });
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

  document.addEventListener("htmx:afterSwap", function (event) {
    if (!isPlan(event.target)) {
      return;
    }
    carryQuick();
    putBackTyped(); // before the focus: setting a value moves the caret
    restoreFocus();
    kept = null;
  });

  // An error fragment lands in a part of the plan (a row, the alert slot): the request is
  // over all the same.
  document.addEventListener("htmx:afterSettle", function (event) {
    if (!isPlan(event.target) && !isErrorFragment(event.detail.xhr)) {
      return;
    }
    busy = false;
    sendPending();
  });

  // --- Editing a row -------------------------------------------------------------------------
  // A changed field saves its row (the form the field belongs to); Enter saves at once.
  // A select fires change on each arrow key: its row is saved once the choice rests for a
  // moment, or when the person leaves it, so passing "pinned" on the way stores nothing.
  var SELECT_REST_MS = 500;
  var resting = null; // {id, timer} of the row select whose save waits

  function saveResting() {
    var wait = resting;
    resting = null;
    if (wait) {
      clearTimeout(wait.timer);
      saveRow(rowForm(document.getElementById(wait.id)), false);
    }
  }

  document.addEventListener("change", function (event) {
    var el = event.target;
    if (el && el.tagName === "SELECT" && el.id && rowForm(el)) {
      if (resting && resting.id !== el.id) {
        saveResting();
      }
      if (resting) {
        clearTimeout(resting.timer);
      } else {
        el.addEventListener("blur", saveResting, { once: true });
      }
      resting = { id: el.id, timer: setTimeout(saveResting, SELECT_REST_MS) };
      return;
    }
    saveRow(rowForm(el), false);
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

  // --- A form shown again with errors ------------------------------------------------------
  // A page that comes back refused starts at its first problem: the error summary takes the
  // focus by itself (autofocus); on forms without one, the first field marked invalid, or else
  // the form's message. Nothing moves when the page put the focus somewhere already.
  function focusFirstError() {
    if (document.querySelector("[autofocus]") || (document.activeElement && document.activeElement !== document.body)) {
      return;
    }
    var first = document.querySelector('main [aria-invalid="true"], main form .form-error[role="alert"]');
    if (!first) {
      return;
    }
    if (!isField(first) && !first.hasAttribute("tabindex")) {
      first.setAttribute("tabindex", "-1");
    }
    first.focus();
  }

  // A link of the error summary, or a jump link to a field, puts the keyboard in its field,
  // not only the view there.
  document.addEventListener("click", function (event) {
    var link = event.target && event.target.closest ? event.target.closest(".error-summary a[href^='#'], a.to-field[href^='#']") : null;
    var field = link ? document.getElementById(link.getAttribute("href").slice(1)) : null;
    if (field && typeof field.focus === "function") {
      event.preventDefault();
      field.focus();
    }
  });

  if (document.readyState === "loading") {
    document.addEventListener("DOMContentLoaded", focusFirstError);
  } else {
    focusFirstError();
  }

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
      saveRow(form, true);
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
