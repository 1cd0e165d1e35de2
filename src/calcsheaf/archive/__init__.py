"""Archive: people's keys, sign-offs, issued revisions, manifests, PDF signatures, verify, diff.

Nothing here imports the analysis stack (sympy, scipy, matplotlib, weasyprint) so that
`calcsheaf verify` starts fast; pyHanko is imported only where PDFs are signed or checked.
"""
