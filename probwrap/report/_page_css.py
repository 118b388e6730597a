"""The report page's style sheet (one inline <style> block; colours and layout of our own)."""

from __future__ import annotations

__all__ = ["PAGE_CSS"]

PAGE_CSS = """
:root { --ink:#1f2a36; --paper:#fbfaf6; --rule:#d8d2c4; --accent:#0f6e74; --warm:#b8432f; }
* { box-sizing: border-box; }
body { margin:0; font-family: Georgia, 'DejaVu Serif', serif; color:var(--ink);
       background:#f3f0e8; line-height:1.45; }
header.pw-head { background:var(--ink); color:#f3f0e8; padding:1.4rem 2rem 1rem; }
header.pw-head h1 { margin:0 0 .3rem; font-size:1.6rem; letter-spacing:.02em; }
header.pw-head p { margin:0; font-size:.85rem; opacity:.85; }
nav.pw-nav { background:#e8e2d4; padding:.5rem 2rem; font-size:.85rem; }
nav.pw-nav a { color:var(--ink); margin-right:1.2rem; text-decoration:none;
               border-bottom:2px solid var(--accent); }
main { max-width:980px; margin:0 auto; padding:1rem 2rem 3rem; }
section { background:var(--paper); border-left:5px solid var(--accent); margin:1.2rem 0;
          padding:.8rem 1.4rem 1.2rem; }
section#cautions { border-left-color:var(--warm); }
h2 { font-size:1.2rem; margin:.4rem 0 .6rem; }
h2 .pw-num { color:var(--accent); margin-right:.4rem; }
.pw-glance { display:flex; flex-wrap:wrap; gap:.8rem; margin:.6rem 0; padding:0; }
.pw-glance li { list-style:none; background:#fff; border:1px solid var(--rule);
                padding:.5rem .8rem; min-width:10rem; }
.pw-glance b { display:block; font-size:1.15rem; }
table { border-collapse:collapse; margin:.6rem 0; font-size:.85rem;
        font-family:'DejaVu Sans Mono', monospace; }
th, td { border-bottom:1px solid var(--rule); padding:.25rem .6rem; text-align:right; }
th:first-child, td:first-child { text-align:left; font-family:Georgia, serif; }
thead th { border-bottom:2px solid var(--ink); }
tr.pw-chosen td { background:#eaf4f1; font-weight:bold; }
tr.pw-unreachable td { color:var(--warm); font-style:italic; }
figure { margin:.8rem 0; }
figure svg { max-width:100%; height:auto; display:block; background:#fff;
             border:1px solid var(--rule); }
figcaption { font-size:.8rem; margin-top:.3rem; }
.pw-note { font-size:.82rem; color:#4a5561; }
.pw-notes { background:#fff7e6; border:1px solid #e0b45a; padding:.4rem .9rem; margin:.6rem 0;
             font-size:.82rem; }
.pw-notes h3 { font-size:.9rem; margin:.2rem 0; }
.pw-notes ul { margin:.2rem 0; padding-left:1.2rem; }
.pw-recommend { background:#fff; border:2px solid var(--accent); margin:1rem 0;
                padding:.6rem 1.2rem; }
.pw-recommend h2 { margin:.2rem 0 .4rem; }
tr.pw-recommended td:first-child::before { content:"\\25B6  "; color:var(--accent); }
sup.pw-mark a { color:var(--warm); text-decoration:none; }
footer { text-align:center; font-size:.75rem; color:#6b7480; padding:1rem; }
"""
