"""Open the built site in the default browser, or say where it is when there is no display."""
import os
import sys
import webbrowser
from pathlib import Path

page = Path(sys.argv[1]).resolve()
if not page.is_file():
    sys.exit(f"no site at {page}: did the build succeed?")
print(f"catalogue: {page.as_uri()}")
if os.environ.get("DISPLAY") or sys.platform in ("darwin", "win32"):
    webbrowser.open(page.as_uri())
else:
    print("no display here: open that file in a browser, or run 'figfolio serve'")
