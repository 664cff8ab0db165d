/* figfolio page behaviour: copy buttons (every page) and the catalogue search (index page).
   Loaded as a file (no inline script), so it runs under the site's Content-Security-Policy. */
(function () {
  "use strict";

  function copyText(text) {
    if (navigator.clipboard && window.isSecureContext) {
      return navigator.clipboard.writeText(text);
    }
    return new Promise(function (resolve, reject) {
      var area = document.createElement("textarea");
      area.value = text;
      area.setAttribute("readonly", "");
      area.className = "fol-offscreen";
      document.body.appendChild(area);
      area.select();
      var ok = false;
      try { ok = document.execCommand("copy"); } catch (e) { ok = false; }
      document.body.removeChild(area);
      if (ok) { resolve(); } else { reject(new Error("copy refused")); }
    });
  }

  function setupCopyButtons() {
    var buttons = document.querySelectorAll("button[data-copy]");
    Array.prototype.forEach.call(buttons, function (button) {
      var label = button.querySelector(".fol-copy-label");
      button.addEventListener("click", function () {
        var source = document.getElementById(button.getAttribute("data-copy"));
        if (!source) { return; }
        copyText(source.textContent).then(function () {
          if (label) { label.textContent = "Copied"; }
        }, function () {
          if (label) { label.textContent = "Select and copy by hand"; }
        });
        window.setTimeout(function () { if (label) { label.textContent = "Copy"; } }, 2000);
      });
    });
  }

  /* ---- catalogue search ---- */

  function readState() {
    var params = new URLSearchParams(window.location.hash.replace(/^#/, ""));
    var state = { q: params.get("q") || "", filters: {} };
    params.forEach(function (value, key) {
      if (key === "q") { return; }
      (state.filters[key] = state.filters[key] || []).push(value);
    });
    return state;
  }

  function writeState(state) {
    var params = new URLSearchParams();
    if (state.q) { params.set("q", state.q); }
    Object.keys(state.filters).sort().forEach(function (key) {
      state.filters[key].forEach(function (value) { params.append(key, value); });
    });
    var hash = params.toString();
    var target = window.location.pathname + window.location.search + (hash ? "#" + hash : "");
    if (window.history && window.history.replaceState) {
      window.history.replaceState(null, "", target);
    }
  }

  function setupSearch() {
    var input = document.getElementById("fol-q");
    var list = document.getElementById("fol-cards");
    var index = window.FIGFOLIO_INDEX;
    if (!input || !list || !index || !window.FigfolioSearch) { return; }
    var status = document.getElementById("fol-status");
    var empty = document.getElementById("fol-empty");
    var cards = [];
    Array.prototype.forEach.call(list.querySelectorAll("li[data-doc]"), function (li) {
      cards[Number(li.getAttribute("data-doc"))] = li;
    });
    var boxes = Array.prototype.slice.call(document.querySelectorAll("input[data-facet]"));

    function currentFilters() {
      var filters = {};
      index.facets.forEach(function (key) { filters[key] = []; });
      boxes.forEach(function (box) {
        if (box.checked) { (filters[box.getAttribute("data-facet")] = filters[box.getAttribute("data-facet")] || []).push(box.value); }
      });
      return filters;
    }

    /* Only the best PAGE cards are shown (more on request): a keystroke then touches a
       bounded number of elements however large the catalogue is. */
    var PAGE = 120, limit = PAGE, shown = [], lastResult = null;
    var more = document.getElementById("fol-more");
    cards.forEach(function (card) { if (card) { card.hidden = true; } });

    function show(result) {
      var next = result.hits.slice(0, limit);
      shown.forEach(function (d) { if (cards[d]) { cards[d].hidden = true; } });
      var fragment = document.createDocumentFragment();
      next.forEach(function (d) {
        if (cards[d]) { cards[d].hidden = false; fragment.appendChild(cards[d]); }
      });
      list.insertBefore(fragment, list.firstChild);
      shown = next;
      lastResult = result;
      boxes.forEach(function (box) {
        var key = box.getAttribute("data-facet");
        var n = (result.counts[key] && result.counts[key][box.value]) || 0;
        var count = box.parentNode.querySelector(".fol-count");
        if (count) { count.textContent = String(n); }
        box.parentNode.parentNode.classList.toggle("fol-zero", n === 0 && !box.checked);
      });
      var n = result.hits.length;
      if (status) {
        status.textContent = n + (n === 1 ? " recipe" : " recipes") +
          (n > next.length ? ", showing the first " + next.length : "");
      }
      if (empty) { empty.hidden = n !== 0; }
      if (more) {
        more.hidden = n <= next.length;
        more.textContent = "Show " + Math.min(PAGE, n - next.length) + " more";
      }
    }

    function update(save) {
      var filters = currentFilters();
      var result = window.FigfolioSearch.run(index, input.value, filters);
      limit = PAGE;
      show(result);
      if (save) { writeState({ q: input.value.trim(), filters: filters }); }
    }

    function restore() {
      var state = readState();
      input.value = state.q;
      boxes.forEach(function (box) {
        var wanted = state.filters[box.getAttribute("data-facet")] || [];
        box.checked = wanted.indexOf(box.value) !== -1;
      });
      update(false);
    }

    input.addEventListener("input", function () { update(true); });
    boxes.forEach(function (box) { box.addEventListener("change", function () { update(true); }); });
    var clear = document.getElementById("fol-clear");
    if (clear) {
      clear.addEventListener("click", function () {
        input.value = "";
        boxes.forEach(function (box) { box.checked = false; });
        update(true);
        input.focus();
      });
    }
    if (more) {
      more.addEventListener("click", function () {
        limit += PAGE;
        if (lastResult) { show(lastResult); }
      });
    }
    window.addEventListener("hashchange", restore);
    document.addEventListener("keydown", function (event) {
      var target = event.target;
      var typing = target && (target.isContentEditable || /^(INPUT|TEXTAREA|SELECT)$/.test(target.tagName));
      if (event.key === "/" && !typing && !event.ctrlKey && !event.metaKey && !event.altKey) {
        event.preventDefault();
        input.focus();
        input.select();
      }
    });
    restore();
    // On a phone the facet lists would push the cards far down: fold the unused ones.
    if (window.matchMedia && window.matchMedia("(max-width: 56rem)").matches) {
      Array.prototype.forEach.call(document.querySelectorAll("details.fol-facet"), function (d) {
        if (!d.querySelector("input:checked")) { d.open = false; }
      });
    }
  }

  function start() {
    setupCopyButtons();
    setupSearch();
  }

  if (document.readyState === "loading") {
    document.addEventListener("DOMContentLoaded", start);
  } else {
    start();
  }
})();
