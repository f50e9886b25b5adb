"""auditmean's own colours, and the style sheet the panels share.

The palette is our own choice: a dark slate for text and lines, a pine green
for what the sample supports and for sampled strata, an ochre for warnings
and a brick red for what does not hold or is examined in full.
"""

from __future__ import annotations

__all__ = ["INK", "PINE", "OCHRE", "BRICK", "SKY", "PAPER", "MUTED", "STRATUM_COLOURS", "STYLE_SHEET"]

INK = "#23313d"
PINE = "#2f7f6f"
OCHRE = "#b8741a"
BRICK = "#a23b3b"
SKY = "#4f7fa8"
PAPER = "#f6f3ec"
MUTED = "#8a96a0"

#: One colour per stratum, in table order (repeats after eight).
STRATUM_COLOURS = ("#2f7f6f", "#4f7fa8", "#b8741a", "#7a5ea8", "#6a8a34", "#b0604a", "#4c6878", "#a0882a")

STYLE_SHEET = f"""
<style>
.am-panel {{ font-family: system-ui, -apple-system, "Segoe UI", sans-serif; color: {INK}; }}
.am-title {{ font-size: 1.25em; font-weight: 600; margin: 0.2em 0 0.1em 0; color: {INK}; }}
.am-lead {{ color: #4a5863; margin: 0 0 0.6em 0; max-width: 60em; }}
.am-box {{ border-radius: 6px; padding: 0.55em 0.8em; margin: 0.4em 0; max-width: 62em; line-height: 1.4; }}
.am-error {{ background: #f8e6e4; border-left: 5px solid {BRICK}; color: #5a1d1d; }}
.am-note {{ background: #eef3f1; border-left: 5px solid {PINE}; }}
.am-warning {{ background: #faf0df; border-left: 5px solid {OCHRE}; }}
.am-cautions {{ background: {PAPER}; border-left: 5px solid {INK}; font-size: 0.92em; }}
.am-cautions ul {{ margin: 0.2em 0 0 1.1em; padding: 0; }}
.am-verdict-supports {{ background: #e3f1ec; border-left: 6px solid {PINE}; }}
.am-verdict-does-not-support {{ background: #f8e6e4; border-left: 6px solid {BRICK}; }}
.am-verdict-cannot-be-assessed {{ background: #faf0df; border-left: 6px solid {OCHRE}; }}
.am-table table, table.auditmean-table {{ border-collapse: collapse; font-size: 0.92em; margin: 0.3em 0; }}
.am-table th, .am-table td, table.auditmean-table th, table.auditmean-table td {{
  padding: 0.2em 0.6em; border-bottom: 1px solid #dde2e5; text-align: right; }}
.am-table th:first-child, .am-table td:first-child,
table.auditmean-table th:first-child, table.auditmean-table td:first-child {{ text-align: left; }}
.am-table caption, table.auditmean-table caption {{ text-align: left; font-weight: 600; padding-bottom: 0.2em; }}
.am-flag {{ margin: 0.25em 0; }}
.am-flag summary {{ cursor: pointer; }}
.am-small {{ font-size: 0.88em; color: #56636d; }}
.am-demo {{ background: #fff4d6; border: 2px dashed {OCHRE}; }}
.am-row-saved {{ color: {PINE}; }}
.am-row-error {{ color: {BRICK}; }}
.am-relied td {{ background: #e3f1ec; font-weight: 600; }}
.am-mu-bounds td:last-child {{ text-align: left; max-width: 28em; }}
.am-header {{ background: {INK}; color: white; padding: 0.6em 1em; border-radius: 6px; }}
.am-header b {{ font-size: 1.3em; letter-spacing: 0.02em; }}
</style>
"""
