"""The caption printed under every exported figure: what a reader needs who was not in the room.

Model, sentence, the predicted label with its probability, the expected label
and whether the sentence is a misfire, the view and where in the model it looks
(layer/head), the metric, the colour scale and the method's settings. Empty
parts are left out; nothing is written twice.
"""

from __future__ import annotations

from dataclasses import dataclass

from inspector import formatting as fmt
from inspector.figures.paper import wrap

MISFIRE_MARK = "\u2715 misfire"
AS_EXPECTED_MARK = "\u2713 as expected"


def prediction_line(
    predicted: str | None,
    probability: float | None,
    expected: str | None,
    expected_probability: float | None = None,
) -> str:
    """``Predicted: change_booking 97.6% · expected: cancel_booking 1.5% · ✕ misfire`` (one line, no period)."""
    if predicted is None:
        return "No prediction (the model has no sentence labels)"
    line = f"Predicted: {predicted} {fmt.percent(probability)}"
    if expected is None:
        return line + " \u00b7 no expected label given"
    share = f" {fmt.percent(expected_probability)}" if expected_probability is not None else ""
    mark = MISFIRE_MARK if expected != predicted else AS_EXPECTED_MARK
    return f"{line} \u00b7 expected: {expected}{share} \u00b7 {mark}"


@dataclass(frozen=True)
class Caption:
    """What a figure shows, printed under it."""

    model: str
    sentence: str
    view: str
    where: str = ""
    """Layer/head, token axis, query: where in the model the view looks."""
    metric: str = ""
    scale: str = ""
    """The colour scale in words (which map, from what to what)."""
    predicted: str | None = None
    probability: float | None = None
    expected: str | None = None
    expected_probability: float | None = None
    settings: str = ""
    """The method's settings (Integrated Gradients steps, occlusion mode, link threshold ...)."""

    def parts(self) -> list[str]:
        """The caption's sentences, in order."""
        view = f"View: {self.view}" + (f"; {self.where}" if self.where else "")
        out = [f"Model: {self.model}. {view}."]
        if self.sentence:
            out.append(f"Sentence: \u201c{self.sentence}\u201d")
        if self.predicted is not None or self.sentence:
            out.append(
                prediction_line(self.predicted, self.probability, self.expected, self.expected_probability)
                + "."
            )
        if self.metric:
            out.append(f"Metric: {self.metric}.")
        if self.scale:
            out.append(f"Colour: {self.scale}.")
        if self.settings:
            out.append(f"Settings: {self.settings}.")
        return out

    def lines(self, width: float, size: float) -> list[str]:
        """The caption wrapped to ``width`` inches at ``size`` points."""
        out: list[str] = []
        for part in self.parts():
            out += wrap(part, width, size)
        return out

    def text(self, width: float = 10.0, size: float = 7.5) -> str:
        return "\n".join(self.lines(width, size))
