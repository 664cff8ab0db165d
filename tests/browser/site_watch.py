"""Shared helpers for driving a BUILT site in headless Chromium (Debian's, via Playwright).

Why a module: the hostile-build test and the demo-site test open real built sites the same way
(file:// and a local HTTP server under a path prefix) and watch the same things: console
errors, dialogs, CSP violations, failed loads and every request that would leave the site.
"""
from __future__ import annotations

import functools
import shutil
import threading
from contextlib import contextmanager
from http.server import SimpleHTTPRequestHandler, ThreadingHTTPServer
from pathlib import Path
from typing import Any, Iterator

CHROMIUM = Path("/usr/bin/chromium")
ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
        "--disable-background-networking"]
AXE = Path(__file__).resolve().parent / "node_modules" / "axe-core" / "axe.min.js"
PREFIX = "/team/figs/"

# Content Security Policy Level 3 (W3C): a blocked script, style or load fires this event.
RECORDER = """
window.__violations = [];
document.addEventListener('securitypolicyviolation', function (e) {
  window.__violations.push(e.violatedDirective + ' ' + e.blockedURI);
});
"""

# The DOM after scripts ran: event-handler attributes, script URLs, foreign scripts (HTML
# Standard: "event handler content attributes", "javascript: URL" navigation).
DOM_AUDIT = """() => {
  const bad = [];
  for (const el of document.querySelectorAll('*')) {
    for (const a of el.getAttributeNames()) {
      const v = (el.getAttribute(a) || '').replace(/[\\s\\x00-\\x1f]/g, '').toLowerCase();
      if (a.startsWith('on')) bad.push(el.tagName + ' ' + a);
      if (['href', 'src', 'action', 'formaction', 'data', 'xlink:href'].includes(a)
          && (v.startsWith('javascript:') || v.startsWith('data:text'))) bad.push(el.tagName + ' ' + a + '=' + v);
    }
    if (['IFRAME', 'OBJECT', 'EMBED', 'FORM'].includes(el.tagName)) bad.push(el.tagName);
  }
  for (const s of document.scripts) {
    const name = (s.getAttribute('src') || 'inline').split('/').pop();
    if (!['app.js', 'search.js', 'search-index.js'].includes(name)) bad.push('script ' + name);
  }
  if (window.__pwned) bad.push('payload ran ' + window.__pwned + ' time(s)');
  return bad;
}"""


class Quiet(SimpleHTTPRequestHandler):
    def log_message(self, *args: Any) -> None:  # keep test output clean
        pass


@contextmanager
def serve_under_prefix(site: Path, www: Path) -> Iterator[str]:
    """Copy ``site`` to ``www`` + PREFIX and serve ``www`` on 127.0.0.1; yields the base URL."""
    shutil.copytree(site, www / PREFIX.strip("/"))
    httpd = ThreadingHTTPServer(("127.0.0.1", 0), functools.partial(Quiet, directory=str(www)))
    thread = threading.Thread(target=httpd.serve_forever, daemon=True)
    thread.start()
    try:
        yield f"http://127.0.0.1:{httpd.server_address[1]}{PREFIX}"
    finally:
        httpd.shutdown()
        httpd.server_close()


@contextmanager
def chromium() -> Iterator[Any]:
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=str(CHROMIUM), args=ARGS)
        try:
            yield browser
        finally:
            browser.close()


class Watch:
    """Records console errors, page errors, dialogs, failed loads and every request."""

    def __init__(self, page: Any, base: str) -> None:
        self.errors: list[str] = []
        self.dialogs: list[str] = []
        self.requests: list[str] = []
        self.failed: list[str] = []
        self.base = base
        page.on("console", lambda m: m.type == "error" and self.errors.append(m.text))
        page.on("pageerror", lambda e: self.errors.append(str(e)))
        page.on("dialog", self._dialog)
        page.on("request", lambda r: self.requests.append(r.url))
        page.on("requestfailed", self._failed)
        page.on("response", lambda r: r.status >= 400 and self.failed.append(r.url))
        page.add_init_script(RECORDER)

    def _failed(self, request: Any) -> None:
        # net::ERR_ABORTED is a load the browser itself cancelled because the test navigated
        # on (a favicon still in flight, say); it says nothing about the site.
        if "ERR_ABORTED" not in (request.failure or ""):
            self.failed.append(request.url)

    def _dialog(self, dialog: Any) -> None:
        self.dialogs.append(dialog.message)
        dialog.dismiss()

    def outside(self) -> list[str]:
        return [u for u in self.requests if not u.startswith(self.base)]


def new_page(browser: Any, base: str, **kwargs: Any) -> tuple[Any, Any, Watch]:
    """A fresh context whose every request leaving ``base`` is refused (and recorded)."""
    context = browser.new_context(accept_downloads=True, **kwargs)

    def guard(route: Any) -> None:
        if route.request.url.startswith(base):
            route.continue_()
        else:
            route.abort()
    context.route("**/*", guard)
    page = context.new_page()
    return context, page, Watch(page, base)


def axe_serious(browser: Any, base: str, paths: list[str]) -> dict[str, list[str]]:
    """axe-core's serious and critical violations per page (axe-core from npm, tests/browser).

    axe is injected as a script tag, which the site's CSP rightly blocks, so this context
    alone bypasses CSP.
    """
    context = browser.new_context(bypass_csp=True)
    page = context.new_page()
    problems: dict[str, list[str]] = {}
    for path in paths:
        page.goto(base + path)
        page.add_script_tag(path=str(AXE))
        result = page.evaluate("axe.run(document, {resultTypes: ['violations']})")
        bad = [f"{v['id']}: {v['help']} ({len(v['nodes'])})" for v in result["violations"]
               if v["impact"] in ("serious", "critical")]
        if bad:
            problems[path] = bad
    context.close()
    return problems
