"""What the user reads: terminal text, the report (Markdown/HTML), figures and the files written to
an output folder.

Kept empty of imports so that light modules (no numpy) stay light."""
