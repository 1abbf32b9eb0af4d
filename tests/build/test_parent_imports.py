"""The build's parent process does not load the PDF engine: only workers write PDFs."""

from __future__ import annotations

import subprocess
import sys


def test_the_pipeline_and_the_templates_load_without_weasyprint() -> None:
    code = ("import sys\n"
            "import springback.build.pipeline\n"
            "from springback.build.fingerprints import template_files\n"
            "from pathlib import Path\n"
            "template_files(Path('.'))\n"
            "print('weasyprint' in sys.modules)\n"
            "from springback import render\n"
            "render.html_to_pdf\n"
            "print('weasyprint' in sys.modules)\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout.split()
    assert out == ["False", "True"]  # loaded on first use of html_to_pdf, not before
