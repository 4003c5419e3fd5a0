"""Write the demo's self-contained HTML report and its overview figure (what `make demo` runs).

    python examples/write_report.py examples/data/flakes.csv examples/output/flakes_report.html

Writes, next to the report, ``<name>_overview.png`` (the one-page overview of the checks
that warn or fail, drawn with matplotlib) so a person can look at the findings without a
browser. If a command-line HTML renderer happens to be installed (``wkhtmltoimage``, or a
Chromium/Chrome that can take headless screenshots), it also renders the report itself to
``<name>_page.png``; that step is optional and skipped with a note otherwise.
"""

from __future__ import annotations

import argparse
import shutil
import subprocess
from pathlib import Path

import pandas as pd

import discaudit

_BROWSERS = ("chromium", "chromium-browser", "google-chrome", "google-chrome-stable")


def render_page(html_path: Path, png_path: Path) -> str:
    """Render the HTML file to PNG with a renderer found on PATH; say what happened."""
    tool = shutil.which("wkhtmltoimage")
    if tool:
        command = [tool, "--quiet", "--width", "1200", str(html_path), str(png_path)]
    else:
        browser = next((b for b in map(shutil.which, _BROWSERS) if b), None)
        if browser is None:
            return "no HTML renderer (wkhtmltoimage, Chromium) on PATH: page screenshot skipped"
        command = [
            browser,
            "--headless",
            "--disable-gpu",
            "--no-sandbox",
            f"--screenshot={png_path}",
            "--window-size=1200,4000",
            html_path.resolve().as_uri(),
        ]
    try:
        subprocess.run(command, check=True, timeout=120, capture_output=True)
    except (OSError, subprocess.SubprocessError) as exc:
        return f"page screenshot failed ({type(exc).__name__}); the HTML report is unaffected"
    return f"page screenshot written to {png_path}"


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("data", nargs="?", default="examples/data/flakes.csv")
    parser.add_argument("output", nargs="?", default="examples/output/flakes_report.html")
    parser.add_argument("--target", default="family")
    parser.add_argument("--index-col", default="flake_id")
    args = parser.parse_args(argv)

    frame = pd.read_csv(args.data, index_col=args.index_col)
    verdict = discaudit.preflight(frame, target=args.target, random_state=0)
    out = Path(args.output)
    out.parent.mkdir(parents=True, exist_ok=True)
    out.write_text(verdict.to_html(), encoding="utf-8")
    print(f"HTML report written to {out} (open it in any browser; it needs no network)")

    overview = out.with_name(out.stem.removesuffix("_report") + "_overview.png")
    verdict.plot().savefig(overview, dpi=100, metadata={"Software": None})
    print(f"overview figure written to {overview}")
    print(render_page(out, out.with_name(out.stem + "_page.png")))


if __name__ == "__main__":
    main()
