"""The run report: ``report.html``, one self-contained page with the caution, the answer in plain
words and the figures (map, equal-area net, residuals, model scores, thickness), made from a run's
output folder in bounded memory; its sentences (:mod:`strikeline.report.sentences`) are the QGIS
log's too. Drawing needs matplotlib (the ``plot`` extra); without it
:func:`write_report` writes nothing and says how to install it.
"""
from strikeline.report.page import MISSING_PLOT, render_report, write_report
from strikeline.report.sentences import answer_sentences, plain_answer, plane_words

__all__ = ["MISSING_PLOT", "answer_sentences", "plain_answer", "plane_words", "render_report", "write_report"]
