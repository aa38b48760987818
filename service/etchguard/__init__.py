"""etchguard: process-antenna ratios for routers, while they route.

The public face of the package; the modules behind it are private rooms, one per
concept: geometry, rules, nets, net state, ratios, what-if, advice, engine.
"""

from ._advice import Advice, AdviceRequest, DiodeAdvice, JumperAdvice, LayerOption, PlacedShape
from ._columns import BatchScores, CommonShapes  # columnar batch scores (Engine.score_columns)
from ._costs import CostModel
from ._engine import Engine, Limits
from ._errors import (
    AlreadyExistsError,
    CancelledError,
    DeadlineExceededError,
    DeckError,
    EtchguardError,
    InputError,
    LimitExceededError,
    NoDeckError,
    NotFoundError,
    StoppedError,
)
from ._geometry import Rect, run_rect, union_measures
from ._names import MAX_NAME_BYTES
from ._nets import (
                      NetSpec,
                      Pin,
                      Shape,
                      load_net_file,
                      make_pin,
                      make_shape,
                      parse_net_file,
                      resolve_layer,
                      run_shapes,
                      via_shapes,
)
from ._obstacles import Conflict
from ._results import CheckResult, Headroom, NetReport, RatioChange, Score
from ._rules import Deck, Layer, Rule, load_deck, loads_deck, parse_deck

__version__ = "0.1.0"

__all__ = [
    "Advice", "AdviceRequest", "Conflict", "DiodeAdvice", "JumperAdvice", "LayerOption",
    "PlacedShape",
    "AlreadyExistsError", "BatchScores", "CancelledError", "CheckResult", "CommonShapes", "CostModel",
    "DeadlineExceededError", "Deck", "DeckError", "Engine", "StoppedError",
    "EtchguardError", "Headroom", "InputError", "Layer", "LimitExceededError", "Limits",
    "MAX_NAME_BYTES",
    "NetReport", "NetSpec", "NoDeckError", "NotFoundError", "Pin", "RatioChange", "Rect",
    "Rule", "Score", "Shape", "load_deck", "load_net_file", "loads_deck", "make_pin",
    "make_shape", "parse_deck", "parse_net_file", "resolve_layer", "run_rect", "run_shapes",
    "union_measures", "via_shapes", "__version__",
]
