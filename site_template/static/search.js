/* figfolio search core: pure functions over window.FIGFOLIO_INDEX (see site_search.py).
   No DOM here, so it can be benchmarked on its own: FigfolioSearch.run(index, query, filters). */
(function (global) {
  "use strict";

  var SPLIT = /[^\p{L}\p{N}]+/u;
  var MARKS = /\p{M}/gu;
  var PREFIX_FACTOR = 0.6; // a prefix hit counts less than the whole word

  function tokenize(text) {
    return String(text || "").toLowerCase().normalize("NFKD").replace(MARKS, "")
      .split(SPLIT).filter(function (t) { return t.length > 0; });
  }

  function lowerBound(terms, key) {
    var lo = 0, hi = terms.length;
    while (lo < hi) {
      var mid = (lo + hi) >>> 1;
      if (terms[mid] < key) { lo = mid + 1; } else { hi = mid; }
    }
    return lo;
  }

  /* Score of every doc for one token: best weight among the terms it is a prefix of. */
  function tokenScores(index, token, n) {
    var acc = new Float64Array(n);
    var terms = index.terms, postings = index.postings;
    for (var i = lowerBound(terms, token); i < terms.length; i++) {
      var term = terms[i];
      if (term.lastIndexOf(token, 0) !== 0) { break; }
      var factor = term.length === token.length ? 1 : PREFIX_FACTOR;
      var row = postings[i];
      for (var j = 0; j < row.length; j += 2) {
        var w = row[j + 1] * factor;
        if (w > acc[row[j]]) { acc[row[j]] = w; }
      }
    }
    return acc;
  }

  /* Scores for a whole query (every token must match), or null for an empty query. */
  function score(index, query) {
    var tokens = tokenize(query);
    if (!tokens.length) { return null; }
    var n = index.docs.length, total = null;
    for (var t = 0; t < tokens.length; t++) {
      var acc = tokenScores(index, tokens[t], n);
      if (total === null) { total = acc; continue; }
      for (var d = 0; d < n; d++) { total[d] = (total[d] > 0 && acc[d] > 0) ? total[d] + acc[d] : 0; }
    }
    return total;
  }

  function hasAny(values, wanted) {
    for (var i = 0; i < wanted.length; i++) { if (values.indexOf(wanted[i]) !== -1) { return true; } }
    return false;
  }

  /* Facet filter: OR within a facet, AND across facets; `skip` ignores one facet (for counts). */
  function passes(doc, filters, skip) {
    for (var key in filters) {
      if (key === skip || !filters[key].length) { continue; }
      if (!hasAny(doc.f[key] || [], filters[key])) { return false; }
    }
    return true;
  }

  /* -> {hits: [doc numbers, best first], counts: {facet: {value: n}}} */
  function run(index, query, filters) {
    filters = filters || {};
    var scores = score(index, query), docs = index.docs, hits = [], counts = {};
    var facets = index.facets;
    for (var k = 0; k < facets.length; k++) { counts[facets[k]] = {}; }
    for (var d = 0; d < docs.length; d++) {
      if (scores !== null && !(scores[d] > 0)) { continue; }
      var doc = docs[d];
      if (passes(doc, filters, null)) { hits.push(d); }
      for (var f = 0; f < facets.length; f++) {
        var key = facets[f];
        if (!passes(doc, filters, key)) { continue; }
        var values = doc.f[key] || [];
        for (var v = 0; v < values.length; v++) {
          counts[key][values[v]] = (counts[key][values[v]] || 0) + 1;
        }
      }
    }
    if (scores !== null) {
      hits.sort(function (a, b) { return (scores[b] - scores[a]) || (a - b); });
    }
    return { hits: hits, counts: counts };
  }

  global.FigfolioSearch = { tokenize: tokenize, lowerBound: lowerBound, score: score, run: run };
})(window);
