from google.protobuf.internal import containers as _containers
from google.protobuf.internal import enum_type_wrapper as _enum_type_wrapper
from google.protobuf import descriptor as _descriptor
from google.protobuf import message as _message
from collections.abc import Iterable as _Iterable, Mapping as _Mapping
from typing import ClassVar as _ClassVar, Optional as _Optional, Union as _Union

DESCRIPTOR: _descriptor.FileDescriptor

class LayerKind(int, metaclass=_enum_type_wrapper.EnumTypeWrapper):
    __slots__ = ()
    LAYER_KIND_UNSPECIFIED: _ClassVar[LayerKind]
    LAYER_KIND_ROUTING: _ClassVar[LayerKind]
    LAYER_KIND_CUT: _ClassVar[LayerKind]

class Direction(int, metaclass=_enum_type_wrapper.EnumTypeWrapper):
    __slots__ = ()
    DIRECTION_UNSPECIFIED: _ClassVar[Direction]
    DIRECTION_HORIZONTAL: _ClassVar[Direction]
    DIRECTION_VERTICAL: _ClassVar[Direction]

class Measure(int, metaclass=_enum_type_wrapper.EnumTypeWrapper):
    __slots__ = ()
    MEASURE_UNSPECIFIED: _ClassVar[Measure]
    MEASURE_AREA: _ClassVar[Measure]
    MEASURE_SIDE: _ClassVar[Measure]

class RatioKind(int, metaclass=_enum_type_wrapper.EnumTypeWrapper):
    __slots__ = ()
    RATIO_KIND_UNSPECIFIED: _ClassVar[RatioKind]
    RATIO_KIND_PARTIAL: _ClassVar[RatioKind]
    RATIO_KIND_CUMULATIVE: _ClassVar[RatioKind]

class OptionStatus(int, metaclass=_enum_type_wrapper.EnumTypeWrapper):
    __slots__ = ()
    OPTION_STATUS_UNSPECIFIED: _ClassVar[OptionStatus]
    OPTION_STATUS_LEGAL: _ClassVar[OptionStatus]
    OPTION_STATUS_ILLEGAL: _ClassVar[OptionStatus]
    OPTION_STATUS_BLOCKED: _ClassVar[OptionStatus]

class LimitedBy(int, metaclass=_enum_type_wrapper.EnumTypeWrapper):
    __slots__ = ()
    LIMITED_BY_UNSPECIFIED: _ClassVar[LimitedBy]
    LIMITED_BY_LIMIT: _ClassVar[LimitedBy]
    LIMITED_BY_HOP_ROOM: _ClassVar[LimitedBy]
    LIMITED_BY_RUN: _ClassVar[LimitedBy]
LAYER_KIND_UNSPECIFIED: LayerKind
LAYER_KIND_ROUTING: LayerKind
LAYER_KIND_CUT: LayerKind
DIRECTION_UNSPECIFIED: Direction
DIRECTION_HORIZONTAL: Direction
DIRECTION_VERTICAL: Direction
MEASURE_UNSPECIFIED: Measure
MEASURE_AREA: Measure
MEASURE_SIDE: Measure
RATIO_KIND_UNSPECIFIED: RatioKind
RATIO_KIND_PARTIAL: RatioKind
RATIO_KIND_CUMULATIVE: RatioKind
OPTION_STATUS_UNSPECIFIED: OptionStatus
OPTION_STATUS_LEGAL: OptionStatus
OPTION_STATUS_ILLEGAL: OptionStatus
OPTION_STATUS_BLOCKED: OptionStatus
LIMITED_BY_UNSPECIFIED: LimitedBy
LIMITED_BY_LIMIT: LimitedBy
LIMITED_BY_HOP_ROOM: LimitedBy
LIMITED_BY_RUN: LimitedBy

class Rect(_message.Message):
    __slots__ = ("xlo", "ylo", "xhi", "yhi")
    XLO_FIELD_NUMBER: _ClassVar[int]
    YLO_FIELD_NUMBER: _ClassVar[int]
    XHI_FIELD_NUMBER: _ClassVar[int]
    YHI_FIELD_NUMBER: _ClassVar[int]
    xlo: int
    ylo: int
    xhi: int
    yhi: int
    def __init__(self, xlo: _Optional[int] = ..., ylo: _Optional[int] = ..., xhi: _Optional[int] = ..., yhi: _Optional[int] = ...) -> None: ...

class Run(_message.Message):
    __slots__ = ("x1", "y1", "x2", "y2", "width", "extension")
    X1_FIELD_NUMBER: _ClassVar[int]
    Y1_FIELD_NUMBER: _ClassVar[int]
    X2_FIELD_NUMBER: _ClassVar[int]
    Y2_FIELD_NUMBER: _ClassVar[int]
    WIDTH_FIELD_NUMBER: _ClassVar[int]
    EXTENSION_FIELD_NUMBER: _ClassVar[int]
    x1: int
    y1: int
    x2: int
    y2: int
    width: int
    extension: int
    def __init__(self, x1: _Optional[int] = ..., y1: _Optional[int] = ..., x2: _Optional[int] = ..., y2: _Optional[int] = ..., width: _Optional[int] = ..., extension: _Optional[int] = ...) -> None: ...

class Shape(_message.Message):
    __slots__ = ("layer", "rect", "run")
    LAYER_FIELD_NUMBER: _ClassVar[int]
    RECT_FIELD_NUMBER: _ClassVar[int]
    RUN_FIELD_NUMBER: _ClassVar[int]
    layer: str
    rect: Rect
    run: Run
    def __init__(self, layer: _Optional[str] = ..., rect: _Optional[_Union[Rect, _Mapping]] = ..., run: _Optional[_Union[Run, _Mapping]] = ...) -> None: ...

class Pin(_message.Message):
    __slots__ = ("name", "layer", "rects", "gate_area", "diff_area", "cell_area", "cell_side_area", "block_car", "other_rects")
    class GateAreaEntry(_message.Message):
        __slots__ = ("key", "value")
        KEY_FIELD_NUMBER: _ClassVar[int]
        VALUE_FIELD_NUMBER: _ClassVar[int]
        key: str
        value: float
        def __init__(self, key: _Optional[str] = ..., value: _Optional[float] = ...) -> None: ...
    class CellAreaEntry(_message.Message):
        __slots__ = ("key", "value")
        KEY_FIELD_NUMBER: _ClassVar[int]
        VALUE_FIELD_NUMBER: _ClassVar[int]
        key: str
        value: float
        def __init__(self, key: _Optional[str] = ..., value: _Optional[float] = ...) -> None: ...
    class CellSideAreaEntry(_message.Message):
        __slots__ = ("key", "value")
        KEY_FIELD_NUMBER: _ClassVar[int]
        VALUE_FIELD_NUMBER: _ClassVar[int]
        key: str
        value: float
        def __init__(self, key: _Optional[str] = ..., value: _Optional[float] = ...) -> None: ...
    NAME_FIELD_NUMBER: _ClassVar[int]
    LAYER_FIELD_NUMBER: _ClassVar[int]
    RECTS_FIELD_NUMBER: _ClassVar[int]
    GATE_AREA_FIELD_NUMBER: _ClassVar[int]
    DIFF_AREA_FIELD_NUMBER: _ClassVar[int]
    CELL_AREA_FIELD_NUMBER: _ClassVar[int]
    CELL_SIDE_AREA_FIELD_NUMBER: _ClassVar[int]
    BLOCK_CAR_FIELD_NUMBER: _ClassVar[int]
    OTHER_RECTS_FIELD_NUMBER: _ClassVar[int]
    name: str
    layer: str
    rects: _containers.RepeatedCompositeFieldContainer[Rect]
    gate_area: _containers.ScalarMap[str, float]
    diff_area: float
    cell_area: _containers.ScalarMap[str, float]
    cell_side_area: _containers.ScalarMap[str, float]
    block_car: _containers.RepeatedCompositeFieldContainer[BlockRatio]
    other_rects: _containers.RepeatedCompositeFieldContainer[LayerRect]
    def __init__(self, name: _Optional[str] = ..., layer: _Optional[str] = ..., rects: _Optional[_Iterable[_Union[Rect, _Mapping]]] = ..., gate_area: _Optional[_Mapping[str, float]] = ..., diff_area: _Optional[float] = ..., cell_area: _Optional[_Mapping[str, float]] = ..., cell_side_area: _Optional[_Mapping[str, float]] = ..., block_car: _Optional[_Iterable[_Union[BlockRatio, _Mapping]]] = ..., other_rects: _Optional[_Iterable[_Union[LayerRect, _Mapping]]] = ...) -> None: ...

class LayerRect(_message.Message):
    __slots__ = ("layer", "rect")
    LAYER_FIELD_NUMBER: _ClassVar[int]
    RECT_FIELD_NUMBER: _ClassVar[int]
    layer: str
    rect: Rect
    def __init__(self, layer: _Optional[str] = ..., rect: _Optional[_Union[Rect, _Mapping]] = ...) -> None: ...

class BlockRatio(_message.Message):
    __slots__ = ("layer", "measure", "oxide", "ratio")
    LAYER_FIELD_NUMBER: _ClassVar[int]
    MEASURE_FIELD_NUMBER: _ClassVar[int]
    OXIDE_FIELD_NUMBER: _ClassVar[int]
    RATIO_FIELD_NUMBER: _ClassVar[int]
    layer: str
    measure: Measure
    oxide: str
    ratio: float
    def __init__(self, layer: _Optional[str] = ..., measure: _Optional[_Union[Measure, str]] = ..., oxide: _Optional[str] = ..., ratio: _Optional[float] = ...) -> None: ...

class LayerRange(_message.Message):
    __slots__ = ("lowest", "highest")
    LOWEST_FIELD_NUMBER: _ClassVar[int]
    HIGHEST_FIELD_NUMBER: _ClassVar[int]
    lowest: str
    highest: str
    def __init__(self, lowest: _Optional[str] = ..., highest: _Optional[str] = ...) -> None: ...

class CandidateColumns(_message.Message):
    __slots__ = ("layers", "shape_count", "layer", "xlo", "ylo", "xhi", "yhi", "common_count", "common_layer", "common_xlo", "common_ylo", "common_xhi", "common_yhi", "common_part")
    LAYERS_FIELD_NUMBER: _ClassVar[int]
    SHAPE_COUNT_FIELD_NUMBER: _ClassVar[int]
    LAYER_FIELD_NUMBER: _ClassVar[int]
    XLO_FIELD_NUMBER: _ClassVar[int]
    YLO_FIELD_NUMBER: _ClassVar[int]
    XHI_FIELD_NUMBER: _ClassVar[int]
    YHI_FIELD_NUMBER: _ClassVar[int]
    COMMON_COUNT_FIELD_NUMBER: _ClassVar[int]
    COMMON_LAYER_FIELD_NUMBER: _ClassVar[int]
    COMMON_XLO_FIELD_NUMBER: _ClassVar[int]
    COMMON_YLO_FIELD_NUMBER: _ClassVar[int]
    COMMON_XHI_FIELD_NUMBER: _ClassVar[int]
    COMMON_YHI_FIELD_NUMBER: _ClassVar[int]
    COMMON_PART_FIELD_NUMBER: _ClassVar[int]
    layers: _containers.RepeatedScalarFieldContainer[str]
    shape_count: _containers.RepeatedScalarFieldContainer[int]
    layer: _containers.RepeatedScalarFieldContainer[int]
    xlo: _containers.RepeatedScalarFieldContainer[int]
    ylo: _containers.RepeatedScalarFieldContainer[int]
    xhi: _containers.RepeatedScalarFieldContainer[int]
    yhi: _containers.RepeatedScalarFieldContainer[int]
    common_count: _containers.RepeatedScalarFieldContainer[int]
    common_layer: _containers.RepeatedScalarFieldContainer[int]
    common_xlo: _containers.RepeatedScalarFieldContainer[int]
    common_ylo: _containers.RepeatedScalarFieldContainer[int]
    common_xhi: _containers.RepeatedScalarFieldContainer[int]
    common_yhi: _containers.RepeatedScalarFieldContainer[int]
    common_part: _containers.RepeatedScalarFieldContainer[int]
    def __init__(self, layers: _Optional[_Iterable[str]] = ..., shape_count: _Optional[_Iterable[int]] = ..., layer: _Optional[_Iterable[int]] = ..., xlo: _Optional[_Iterable[int]] = ..., ylo: _Optional[_Iterable[int]] = ..., xhi: _Optional[_Iterable[int]] = ..., yhi: _Optional[_Iterable[int]] = ..., common_count: _Optional[_Iterable[int]] = ..., common_layer: _Optional[_Iterable[int]] = ..., common_xlo: _Optional[_Iterable[int]] = ..., common_ylo: _Optional[_Iterable[int]] = ..., common_xhi: _Optional[_Iterable[int]] = ..., common_yhi: _Optional[_Iterable[int]] = ..., common_part: _Optional[_Iterable[int]] = ...) -> None: ...

class LoadDeckRequest(_message.Message):
    __slots__ = ("toml", "lef")
    TOML_FIELD_NUMBER: _ClassVar[int]
    LEF_FIELD_NUMBER: _ClassVar[int]
    toml: str
    lef: LefRules
    def __init__(self, toml: _Optional[str] = ..., lef: _Optional[_Union[LefRules, _Mapping]] = ...) -> None: ...

class LefRules(_message.Message):
    __slots__ = ("files", "process_name", "dbu_per_micron")
    FILES_FIELD_NUMBER: _ClassVar[int]
    PROCESS_NAME_FIELD_NUMBER: _ClassVar[int]
    DBU_PER_MICRON_FIELD_NUMBER: _ClassVar[int]
    files: _containers.RepeatedCompositeFieldContainer[LefText]
    process_name: str
    dbu_per_micron: int
    def __init__(self, files: _Optional[_Iterable[_Union[LefText, _Mapping]]] = ..., process_name: _Optional[str] = ..., dbu_per_micron: _Optional[int] = ...) -> None: ...

class LefText(_message.Message):
    __slots__ = ("name", "text")
    NAME_FIELD_NUMBER: _ClassVar[int]
    TEXT_FIELD_NUMBER: _ClassVar[int]
    name: str
    text: str
    def __init__(self, name: _Optional[str] = ..., text: _Optional[str] = ...) -> None: ...

class GetDeckRequest(_message.Message):
    __slots__ = ()
    def __init__(self) -> None: ...

class LayerInfo(_message.Message):
    __slots__ = ("name", "step", "kind", "direction", "thickness_um", "wire_width", "spacing", "cut_size", "enclosure")
    NAME_FIELD_NUMBER: _ClassVar[int]
    STEP_FIELD_NUMBER: _ClassVar[int]
    KIND_FIELD_NUMBER: _ClassVar[int]
    DIRECTION_FIELD_NUMBER: _ClassVar[int]
    THICKNESS_UM_FIELD_NUMBER: _ClassVar[int]
    WIRE_WIDTH_FIELD_NUMBER: _ClassVar[int]
    SPACING_FIELD_NUMBER: _ClassVar[int]
    CUT_SIZE_FIELD_NUMBER: _ClassVar[int]
    ENCLOSURE_FIELD_NUMBER: _ClassVar[int]
    name: str
    step: int
    kind: LayerKind
    direction: Direction
    thickness_um: float
    wire_width: int
    spacing: int
    cut_size: int
    enclosure: int
    def __init__(self, name: _Optional[str] = ..., step: _Optional[int] = ..., kind: _Optional[_Union[LayerKind, str]] = ..., direction: _Optional[_Union[Direction, str]] = ..., thickness_um: _Optional[float] = ..., wire_width: _Optional[int] = ..., spacing: _Optional[int] = ..., cut_size: _Optional[int] = ..., enclosure: _Optional[int] = ...) -> None: ...

class DeckInfo(_message.Message):
    __slots__ = ("name", "dbu_per_micron", "cumulative_includes_cuts", "layers", "oxides", "rule_count", "toml", "warnings")
    NAME_FIELD_NUMBER: _ClassVar[int]
    DBU_PER_MICRON_FIELD_NUMBER: _ClassVar[int]
    CUMULATIVE_INCLUDES_CUTS_FIELD_NUMBER: _ClassVar[int]
    LAYERS_FIELD_NUMBER: _ClassVar[int]
    OXIDES_FIELD_NUMBER: _ClassVar[int]
    RULE_COUNT_FIELD_NUMBER: _ClassVar[int]
    TOML_FIELD_NUMBER: _ClassVar[int]
    WARNINGS_FIELD_NUMBER: _ClassVar[int]
    name: str
    dbu_per_micron: int
    cumulative_includes_cuts: bool
    layers: _containers.RepeatedCompositeFieldContainer[LayerInfo]
    oxides: _containers.RepeatedScalarFieldContainer[str]
    rule_count: int
    toml: str
    warnings: _containers.RepeatedScalarFieldContainer[str]
    def __init__(self, name: _Optional[str] = ..., dbu_per_micron: _Optional[int] = ..., cumulative_includes_cuts: _Optional[bool] = ..., layers: _Optional[_Iterable[_Union[LayerInfo, _Mapping]]] = ..., oxides: _Optional[_Iterable[str]] = ..., rule_count: _Optional[int] = ..., toml: _Optional[str] = ..., warnings: _Optional[_Iterable[str]] = ...) -> None: ...

class OpenNetRequest(_message.Message):
    __slots__ = ("net", "pins", "layer_range", "shapes")
    NET_FIELD_NUMBER: _ClassVar[int]
    PINS_FIELD_NUMBER: _ClassVar[int]
    LAYER_RANGE_FIELD_NUMBER: _ClassVar[int]
    SHAPES_FIELD_NUMBER: _ClassVar[int]
    net: str
    pins: _containers.RepeatedCompositeFieldContainer[Pin]
    layer_range: LayerRange
    shapes: _containers.RepeatedCompositeFieldContainer[Shape]
    def __init__(self, net: _Optional[str] = ..., pins: _Optional[_Iterable[_Union[Pin, _Mapping]]] = ..., layer_range: _Optional[_Union[LayerRange, _Mapping]] = ..., shapes: _Optional[_Iterable[_Union[Shape, _Mapping]]] = ...) -> None: ...

class ShapeIds(_message.Message):
    __slots__ = ("shape_ids", "verdict")
    SHAPE_IDS_FIELD_NUMBER: _ClassVar[int]
    VERDICT_FIELD_NUMBER: _ClassVar[int]
    shape_ids: _containers.RepeatedScalarFieldContainer[int]
    verdict: ScoreReply
    def __init__(self, shape_ids: _Optional[_Iterable[int]] = ..., verdict: _Optional[_Union[ScoreReply, _Mapping]] = ...) -> None: ...

class CommitRequest(_message.Message):
    __slots__ = ("net", "shapes", "only_if_legal")
    NET_FIELD_NUMBER: _ClassVar[int]
    SHAPES_FIELD_NUMBER: _ClassVar[int]
    ONLY_IF_LEGAL_FIELD_NUMBER: _ClassVar[int]
    net: str
    shapes: _containers.RepeatedCompositeFieldContainer[Shape]
    only_if_legal: bool
    def __init__(self, net: _Optional[str] = ..., shapes: _Optional[_Iterable[_Union[Shape, _Mapping]]] = ..., only_if_legal: _Optional[bool] = ...) -> None: ...

class RemoveRequest(_message.Message):
    __slots__ = ("net", "shape_ids")
    NET_FIELD_NUMBER: _ClassVar[int]
    SHAPE_IDS_FIELD_NUMBER: _ClassVar[int]
    net: str
    shape_ids: _containers.RepeatedScalarFieldContainer[int]
    def __init__(self, net: _Optional[str] = ..., shape_ids: _Optional[_Iterable[int]] = ...) -> None: ...

class RemoveReply(_message.Message):
    __slots__ = ("removed",)
    REMOVED_FIELD_NUMBER: _ClassVar[int]
    removed: int
    def __init__(self, removed: _Optional[int] = ...) -> None: ...

class CloseNetRequest(_message.Message):
    __slots__ = ("net",)
    NET_FIELD_NUMBER: _ClassVar[int]
    net: str
    def __init__(self, net: _Optional[str] = ...) -> None: ...

class CloseNetReply(_message.Message):
    __slots__ = ()
    def __init__(self) -> None: ...

class DeclareBlockageRequest(_message.Message):
    __slots__ = ("area", "blockage_id")
    AREA_FIELD_NUMBER: _ClassVar[int]
    BLOCKAGE_ID_FIELD_NUMBER: _ClassVar[int]
    area: Shape
    blockage_id: int
    def __init__(self, area: _Optional[_Union[Shape, _Mapping]] = ..., blockage_id: _Optional[int] = ...) -> None: ...

class BlockageId(_message.Message):
    __slots__ = ("id",)
    ID_FIELD_NUMBER: _ClassVar[int]
    id: int
    def __init__(self, id: _Optional[int] = ...) -> None: ...

class RemoveBlockageRequest(_message.Message):
    __slots__ = ("id",)
    ID_FIELD_NUMBER: _ClassVar[int]
    id: int
    def __init__(self, id: _Optional[int] = ...) -> None: ...

class RemoveBlockageReply(_message.Message):
    __slots__ = ()
    def __init__(self) -> None: ...

class ScoreRequest(_message.Message):
    __slots__ = ("net", "candidate", "without_changes")
    NET_FIELD_NUMBER: _ClassVar[int]
    CANDIDATE_FIELD_NUMBER: _ClassVar[int]
    WITHOUT_CHANGES_FIELD_NUMBER: _ClassVar[int]
    net: str
    candidate: _containers.RepeatedCompositeFieldContainer[Shape]
    without_changes: bool
    def __init__(self, net: _Optional[str] = ..., candidate: _Optional[_Iterable[_Union[Shape, _Mapping]]] = ..., without_changes: _Optional[bool] = ...) -> None: ...

class LayerArea(_message.Message):
    __slots__ = ("layer", "area_um2")
    LAYER_FIELD_NUMBER: _ClassVar[int]
    AREA_UM2_FIELD_NUMBER: _ClassVar[int]
    layer: str
    area_um2: float
    def __init__(self, layer: _Optional[str] = ..., area_um2: _Optional[float] = ...) -> None: ...

class RatioChange(_message.Message):
    __slots__ = ("layer", "step", "measure", "kind", "oxide", "gate", "before_ratio", "before_utilization", "ratio", "limit", "utilization", "headroom_um2", "headroom_length_um")
    LAYER_FIELD_NUMBER: _ClassVar[int]
    STEP_FIELD_NUMBER: _ClassVar[int]
    MEASURE_FIELD_NUMBER: _ClassVar[int]
    KIND_FIELD_NUMBER: _ClassVar[int]
    OXIDE_FIELD_NUMBER: _ClassVar[int]
    GATE_FIELD_NUMBER: _ClassVar[int]
    BEFORE_RATIO_FIELD_NUMBER: _ClassVar[int]
    BEFORE_UTILIZATION_FIELD_NUMBER: _ClassVar[int]
    RATIO_FIELD_NUMBER: _ClassVar[int]
    LIMIT_FIELD_NUMBER: _ClassVar[int]
    UTILIZATION_FIELD_NUMBER: _ClassVar[int]
    HEADROOM_UM2_FIELD_NUMBER: _ClassVar[int]
    HEADROOM_LENGTH_UM_FIELD_NUMBER: _ClassVar[int]
    layer: str
    step: int
    measure: Measure
    kind: RatioKind
    oxide: str
    gate: str
    before_ratio: float
    before_utilization: float
    ratio: float
    limit: float
    utilization: float
    headroom_um2: float
    headroom_length_um: float
    def __init__(self, layer: _Optional[str] = ..., step: _Optional[int] = ..., measure: _Optional[_Union[Measure, str]] = ..., kind: _Optional[_Union[RatioKind, str]] = ..., oxide: _Optional[str] = ..., gate: _Optional[str] = ..., before_ratio: _Optional[float] = ..., before_utilization: _Optional[float] = ..., ratio: _Optional[float] = ..., limit: _Optional[float] = ..., utilization: _Optional[float] = ..., headroom_um2: _Optional[float] = ..., headroom_length_um: _Optional[float] = ...) -> None: ...

class ScoreReply(_message.Message):
    __slots__ = ("added_area", "changes", "worst_change_utilization", "worst_utilization", "legal", "breaks_limit", "cost")
    ADDED_AREA_FIELD_NUMBER: _ClassVar[int]
    CHANGES_FIELD_NUMBER: _ClassVar[int]
    WORST_CHANGE_UTILIZATION_FIELD_NUMBER: _ClassVar[int]
    WORST_UTILIZATION_FIELD_NUMBER: _ClassVar[int]
    LEGAL_FIELD_NUMBER: _ClassVar[int]
    BREAKS_LIMIT_FIELD_NUMBER: _ClassVar[int]
    COST_FIELD_NUMBER: _ClassVar[int]
    added_area: _containers.RepeatedCompositeFieldContainer[LayerArea]
    changes: _containers.RepeatedCompositeFieldContainer[RatioChange]
    worst_change_utilization: float
    worst_utilization: float
    legal: bool
    breaks_limit: bool
    cost: float
    def __init__(self, added_area: _Optional[_Iterable[_Union[LayerArea, _Mapping]]] = ..., changes: _Optional[_Iterable[_Union[RatioChange, _Mapping]]] = ..., worst_change_utilization: _Optional[float] = ..., worst_utilization: _Optional[float] = ..., legal: _Optional[bool] = ..., breaks_limit: _Optional[bool] = ..., cost: _Optional[float] = ...) -> None: ...

class ScoreBatchRequest(_message.Message):
    __slots__ = ("net", "candidates", "details")
    NET_FIELD_NUMBER: _ClassVar[int]
    CANDIDATES_FIELD_NUMBER: _ClassVar[int]
    DETAILS_FIELD_NUMBER: _ClassVar[int]
    net: str
    candidates: CandidateColumns
    details: bool
    def __init__(self, net: _Optional[str] = ..., candidates: _Optional[_Union[CandidateColumns, _Mapping]] = ..., details: _Optional[bool] = ...) -> None: ...

class ScoreBatchReply(_message.Message):
    __slots__ = ("cost", "worst_change_utilization", "worst_utilization", "legal", "breaks_limit", "added_area_um2", "details")
    COST_FIELD_NUMBER: _ClassVar[int]
    WORST_CHANGE_UTILIZATION_FIELD_NUMBER: _ClassVar[int]
    WORST_UTILIZATION_FIELD_NUMBER: _ClassVar[int]
    LEGAL_FIELD_NUMBER: _ClassVar[int]
    BREAKS_LIMIT_FIELD_NUMBER: _ClassVar[int]
    ADDED_AREA_UM2_FIELD_NUMBER: _ClassVar[int]
    DETAILS_FIELD_NUMBER: _ClassVar[int]
    cost: _containers.RepeatedScalarFieldContainer[float]
    worst_change_utilization: _containers.RepeatedScalarFieldContainer[float]
    worst_utilization: _containers.RepeatedScalarFieldContainer[float]
    legal: _containers.RepeatedScalarFieldContainer[bool]
    breaks_limit: _containers.RepeatedScalarFieldContainer[bool]
    added_area_um2: _containers.RepeatedScalarFieldContainer[float]
    details: _containers.RepeatedCompositeFieldContainer[ScoreReply]
    def __init__(self, cost: _Optional[_Iterable[float]] = ..., worst_change_utilization: _Optional[_Iterable[float]] = ..., worst_utilization: _Optional[_Iterable[float]] = ..., legal: _Optional[_Iterable[bool]] = ..., breaks_limit: _Optional[_Iterable[bool]] = ..., added_area_um2: _Optional[_Iterable[float]] = ..., details: _Optional[_Iterable[_Union[ScoreReply, _Mapping]]] = ...) -> None: ...

class HeadroomRequest(_message.Message):
    __slots__ = ("net", "layer", "x", "y")
    NET_FIELD_NUMBER: _ClassVar[int]
    LAYER_FIELD_NUMBER: _ClassVar[int]
    X_FIELD_NUMBER: _ClassVar[int]
    Y_FIELD_NUMBER: _ClassVar[int]
    net: str
    layer: str
    x: int
    y: int
    def __init__(self, net: _Optional[str] = ..., layer: _Optional[str] = ..., x: _Optional[int] = ..., y: _Optional[int] = ...) -> None: ...

class HeadroomReply(_message.Message):
    __slots__ = ("layer", "found", "area_um2", "side_um2", "length_um", "binding")
    LAYER_FIELD_NUMBER: _ClassVar[int]
    FOUND_FIELD_NUMBER: _ClassVar[int]
    AREA_UM2_FIELD_NUMBER: _ClassVar[int]
    SIDE_UM2_FIELD_NUMBER: _ClassVar[int]
    LENGTH_UM_FIELD_NUMBER: _ClassVar[int]
    BINDING_FIELD_NUMBER: _ClassVar[int]
    layer: str
    found: bool
    area_um2: float
    side_um2: float
    length_um: float
    binding: str
    def __init__(self, layer: _Optional[str] = ..., found: _Optional[bool] = ..., area_um2: _Optional[float] = ..., side_um2: _Optional[float] = ..., length_um: _Optional[float] = ..., binding: _Optional[str] = ...) -> None: ...

class BudgetRequest(_message.Message):
    __slots__ = ("net", "layer", "x", "y", "common", "window")
    NET_FIELD_NUMBER: _ClassVar[int]
    LAYER_FIELD_NUMBER: _ClassVar[int]
    X_FIELD_NUMBER: _ClassVar[int]
    Y_FIELD_NUMBER: _ClassVar[int]
    COMMON_FIELD_NUMBER: _ClassVar[int]
    WINDOW_FIELD_NUMBER: _ClassVar[int]
    net: str
    layer: str
    x: int
    y: int
    common: _containers.RepeatedCompositeFieldContainer[Shape]
    window: Rect
    def __init__(self, net: _Optional[str] = ..., layer: _Optional[str] = ..., x: _Optional[int] = ..., y: _Optional[int] = ..., common: _Optional[_Iterable[_Union[Shape, _Mapping]]] = ..., window: _Optional[_Union[Rect, _Mapping]] = ...) -> None: ...

class BudgetTerm(_message.Message):
    __slots__ = ("measure", "oxide", "conductor_um2", "per_area", "per_perimeter_um", "factor", "credit_um2", "gate_um2")
    MEASURE_FIELD_NUMBER: _ClassVar[int]
    OXIDE_FIELD_NUMBER: _ClassVar[int]
    CONDUCTOR_UM2_FIELD_NUMBER: _ClassVar[int]
    PER_AREA_FIELD_NUMBER: _ClassVar[int]
    PER_PERIMETER_UM_FIELD_NUMBER: _ClassVar[int]
    FACTOR_FIELD_NUMBER: _ClassVar[int]
    CREDIT_UM2_FIELD_NUMBER: _ClassVar[int]
    GATE_UM2_FIELD_NUMBER: _ClassVar[int]
    measure: Measure
    oxide: str
    conductor_um2: float
    per_area: float
    per_perimeter_um: float
    factor: float
    credit_um2: float
    gate_um2: float
    def __init__(self, measure: _Optional[_Union[Measure, str]] = ..., oxide: _Optional[str] = ..., conductor_um2: _Optional[float] = ..., per_area: _Optional[float] = ..., per_perimeter_um: _Optional[float] = ..., factor: _Optional[float] = ..., credit_um2: _Optional[float] = ..., gate_um2: _Optional[float] = ...) -> None: ...

class BudgetRatio(_message.Message):
    __slots__ = ("layer", "step", "measure", "kind", "oxide", "gate", "limit", "term", "spent", "floor", "always")
    LAYER_FIELD_NUMBER: _ClassVar[int]
    STEP_FIELD_NUMBER: _ClassVar[int]
    MEASURE_FIELD_NUMBER: _ClassVar[int]
    KIND_FIELD_NUMBER: _ClassVar[int]
    OXIDE_FIELD_NUMBER: _ClassVar[int]
    GATE_FIELD_NUMBER: _ClassVar[int]
    LIMIT_FIELD_NUMBER: _ClassVar[int]
    TERM_FIELD_NUMBER: _ClassVar[int]
    SPENT_FIELD_NUMBER: _ClassVar[int]
    FLOOR_FIELD_NUMBER: _ClassVar[int]
    ALWAYS_FIELD_NUMBER: _ClassVar[int]
    layer: str
    step: int
    measure: Measure
    kind: RatioKind
    oxide: str
    gate: str
    limit: float
    term: int
    spent: float
    floor: float
    always: bool
    def __init__(self, layer: _Optional[str] = ..., step: _Optional[int] = ..., measure: _Optional[_Union[Measure, str]] = ..., kind: _Optional[_Union[RatioKind, str]] = ..., oxide: _Optional[str] = ..., gate: _Optional[str] = ..., limit: _Optional[float] = ..., term: _Optional[int] = ..., spent: _Optional[float] = ..., floor: _Optional[float] = ..., always: _Optional[bool] = ...) -> None: ...

class BudgetWatch(_message.Message):
    __slots__ = ("step", "term", "spent", "floor", "held")
    STEP_FIELD_NUMBER: _ClassVar[int]
    TERM_FIELD_NUMBER: _ClassVar[int]
    SPENT_FIELD_NUMBER: _ClassVar[int]
    FLOOR_FIELD_NUMBER: _ClassVar[int]
    HELD_FIELD_NUMBER: _ClassVar[int]
    step: int
    term: int
    spent: float
    floor: float
    held: float
    def __init__(self, step: _Optional[int] = ..., term: _Optional[int] = ..., spent: _Optional[float] = ..., floor: _Optional[float] = ..., held: _Optional[float] = ...) -> None: ...

class CostCurve(_message.Message):
    __slots__ = ("knee", "exponent", "scale", "violation", "over_slope")
    KNEE_FIELD_NUMBER: _ClassVar[int]
    EXPONENT_FIELD_NUMBER: _ClassVar[int]
    SCALE_FIELD_NUMBER: _ClassVar[int]
    VIOLATION_FIELD_NUMBER: _ClassVar[int]
    OVER_SLOPE_FIELD_NUMBER: _ClassVar[int]
    knee: float
    exponent: float
    scale: float
    violation: float
    over_slope: float
    def __init__(self, knee: _Optional[float] = ..., exponent: _Optional[float] = ..., scale: _Optional[float] = ..., violation: _Optional[float] = ..., over_slope: _Optional[float] = ...) -> None: ...

class BudgetReply(_message.Message):
    __slots__ = ("found", "layer", "step", "terms", "ratios", "rest_worst_utilization", "fixed_change_utilization", "common_added_area_um2", "own", "own_pins", "foreign", "window", "cost", "dbu_per_micron", "watches")
    FOUND_FIELD_NUMBER: _ClassVar[int]
    LAYER_FIELD_NUMBER: _ClassVar[int]
    STEP_FIELD_NUMBER: _ClassVar[int]
    TERMS_FIELD_NUMBER: _ClassVar[int]
    RATIOS_FIELD_NUMBER: _ClassVar[int]
    REST_WORST_UTILIZATION_FIELD_NUMBER: _ClassVar[int]
    FIXED_CHANGE_UTILIZATION_FIELD_NUMBER: _ClassVar[int]
    COMMON_ADDED_AREA_UM2_FIELD_NUMBER: _ClassVar[int]
    OWN_FIELD_NUMBER: _ClassVar[int]
    OWN_PINS_FIELD_NUMBER: _ClassVar[int]
    FOREIGN_FIELD_NUMBER: _ClassVar[int]
    WINDOW_FIELD_NUMBER: _ClassVar[int]
    COST_FIELD_NUMBER: _ClassVar[int]
    DBU_PER_MICRON_FIELD_NUMBER: _ClassVar[int]
    WATCHES_FIELD_NUMBER: _ClassVar[int]
    found: bool
    layer: str
    step: int
    terms: _containers.RepeatedCompositeFieldContainer[BudgetTerm]
    ratios: _containers.RepeatedCompositeFieldContainer[BudgetRatio]
    rest_worst_utilization: float
    fixed_change_utilization: float
    common_added_area_um2: float
    own: _containers.RepeatedCompositeFieldContainer[Rect]
    own_pins: _containers.RepeatedCompositeFieldContainer[Rect]
    foreign: _containers.RepeatedCompositeFieldContainer[PlacedShape]
    window: Rect
    cost: CostCurve
    dbu_per_micron: int
    watches: _containers.RepeatedCompositeFieldContainer[BudgetWatch]
    def __init__(self, found: _Optional[bool] = ..., layer: _Optional[str] = ..., step: _Optional[int] = ..., terms: _Optional[_Iterable[_Union[BudgetTerm, _Mapping]]] = ..., ratios: _Optional[_Iterable[_Union[BudgetRatio, _Mapping]]] = ..., rest_worst_utilization: _Optional[float] = ..., fixed_change_utilization: _Optional[float] = ..., common_added_area_um2: _Optional[float] = ..., own: _Optional[_Iterable[_Union[Rect, _Mapping]]] = ..., own_pins: _Optional[_Iterable[_Union[Rect, _Mapping]]] = ..., foreign: _Optional[_Iterable[_Union[PlacedShape, _Mapping]]] = ..., window: _Optional[_Union[Rect, _Mapping]] = ..., cost: _Optional[_Union[CostCurve, _Mapping]] = ..., dbu_per_micron: _Optional[int] = ..., watches: _Optional[_Iterable[_Union[BudgetWatch, _Mapping]]] = ...) -> None: ...

class BudgetsRequest(_message.Message):
    __slots__ = ("requests",)
    REQUESTS_FIELD_NUMBER: _ClassVar[int]
    requests: _containers.RepeatedCompositeFieldContainer[BudgetRequest]
    def __init__(self, requests: _Optional[_Iterable[_Union[BudgetRequest, _Mapping]]] = ...) -> None: ...

class BudgetsReply(_message.Message):
    __slots__ = ("budgets",)
    BUDGETS_FIELD_NUMBER: _ClassVar[int]
    budgets: _containers.RepeatedCompositeFieldContainer[BudgetReply]
    def __init__(self, budgets: _Optional[_Iterable[_Union[BudgetReply, _Mapping]]] = ...) -> None: ...

class CheckNetRequest(_message.Message):
    __slots__ = ("net",)
    NET_FIELD_NUMBER: _ClassVar[int]
    net: str
    def __init__(self, net: _Optional[str] = ...) -> None: ...

class GetNetRequest(_message.Message):
    __slots__ = ("net",)
    NET_FIELD_NUMBER: _ClassVar[int]
    net: str
    def __init__(self, net: _Optional[str] = ...) -> None: ...

class HeldShape(_message.Message):
    __slots__ = ("id", "shape")
    ID_FIELD_NUMBER: _ClassVar[int]
    SHAPE_FIELD_NUMBER: _ClassVar[int]
    id: int
    shape: Shape
    def __init__(self, id: _Optional[int] = ..., shape: _Optional[_Union[Shape, _Mapping]] = ...) -> None: ...

class NetContent(_message.Message):
    __slots__ = ("net", "pins", "shapes", "layer_range")
    NET_FIELD_NUMBER: _ClassVar[int]
    PINS_FIELD_NUMBER: _ClassVar[int]
    SHAPES_FIELD_NUMBER: _ClassVar[int]
    LAYER_RANGE_FIELD_NUMBER: _ClassVar[int]
    net: str
    pins: _containers.RepeatedCompositeFieldContainer[Pin]
    shapes: _containers.RepeatedCompositeFieldContainer[HeldShape]
    layer_range: LayerRange
    def __init__(self, net: _Optional[str] = ..., pins: _Optional[_Iterable[_Union[Pin, _Mapping]]] = ..., shapes: _Optional[_Iterable[_Union[HeldShape, _Mapping]]] = ..., layer_range: _Optional[_Union[LayerRange, _Mapping]] = ...) -> None: ...

class CheckAllRequest(_message.Message):
    __slots__ = ("violations_only",)
    VIOLATIONS_ONLY_FIELD_NUMBER: _ClassVar[int]
    violations_only: bool
    def __init__(self, violations_only: _Optional[bool] = ...) -> None: ...

class Check(_message.Message):
    __slots__ = ("layer", "step", "measure", "kind", "oxide", "ratio", "limit", "utilization", "legal", "gate")
    LAYER_FIELD_NUMBER: _ClassVar[int]
    STEP_FIELD_NUMBER: _ClassVar[int]
    MEASURE_FIELD_NUMBER: _ClassVar[int]
    KIND_FIELD_NUMBER: _ClassVar[int]
    OXIDE_FIELD_NUMBER: _ClassVar[int]
    RATIO_FIELD_NUMBER: _ClassVar[int]
    LIMIT_FIELD_NUMBER: _ClassVar[int]
    UTILIZATION_FIELD_NUMBER: _ClassVar[int]
    LEGAL_FIELD_NUMBER: _ClassVar[int]
    GATE_FIELD_NUMBER: _ClassVar[int]
    layer: str
    step: int
    measure: Measure
    kind: RatioKind
    oxide: str
    ratio: float
    limit: float
    utilization: float
    legal: bool
    gate: str
    def __init__(self, layer: _Optional[str] = ..., step: _Optional[int] = ..., measure: _Optional[_Union[Measure, str]] = ..., kind: _Optional[_Union[RatioKind, str]] = ..., oxide: _Optional[str] = ..., ratio: _Optional[float] = ..., limit: _Optional[float] = ..., utilization: _Optional[float] = ..., legal: _Optional[bool] = ..., gate: _Optional[str] = ...) -> None: ...

class NetReport(_message.Message):
    __slots__ = ("net", "legal", "worst_utilization", "checks")
    NET_FIELD_NUMBER: _ClassVar[int]
    LEGAL_FIELD_NUMBER: _ClassVar[int]
    WORST_UTILIZATION_FIELD_NUMBER: _ClassVar[int]
    CHECKS_FIELD_NUMBER: _ClassVar[int]
    net: str
    legal: bool
    worst_utilization: float
    checks: _containers.RepeatedCompositeFieldContainer[Check]
    def __init__(self, net: _Optional[str] = ..., legal: _Optional[bool] = ..., worst_utilization: _Optional[float] = ..., checks: _Optional[_Iterable[_Union[Check, _Mapping]]] = ...) -> None: ...

class AdviseRequest(_message.Message):
    __slots__ = ("net", "layer", "x1", "y1", "x2", "y2", "width", "allow_non_preferred", "want")
    NET_FIELD_NUMBER: _ClassVar[int]
    LAYER_FIELD_NUMBER: _ClassVar[int]
    X1_FIELD_NUMBER: _ClassVar[int]
    Y1_FIELD_NUMBER: _ClassVar[int]
    X2_FIELD_NUMBER: _ClassVar[int]
    Y2_FIELD_NUMBER: _ClassVar[int]
    WIDTH_FIELD_NUMBER: _ClassVar[int]
    ALLOW_NON_PREFERRED_FIELD_NUMBER: _ClassVar[int]
    WANT_FIELD_NUMBER: _ClassVar[int]
    net: str
    layer: str
    x1: int
    y1: int
    x2: int
    y2: int
    width: int
    allow_non_preferred: bool
    want: _containers.RepeatedScalarFieldContainer[str]
    def __init__(self, net: _Optional[str] = ..., layer: _Optional[str] = ..., x1: _Optional[int] = ..., y1: _Optional[int] = ..., x2: _Optional[int] = ..., y2: _Optional[int] = ..., width: _Optional[int] = ..., allow_non_preferred: _Optional[bool] = ..., want: _Optional[_Iterable[str]] = ...) -> None: ...

class Point(_message.Message):
    __slots__ = ("x", "y")
    X_FIELD_NUMBER: _ClassVar[int]
    Y_FIELD_NUMBER: _ClassVar[int]
    x: int
    y: int
    def __init__(self, x: _Optional[int] = ..., y: _Optional[int] = ...) -> None: ...

class PlacedShape(_message.Message):
    __slots__ = ("layer", "rect")
    LAYER_FIELD_NUMBER: _ClassVar[int]
    RECT_FIELD_NUMBER: _ClassVar[int]
    layer: str
    rect: Rect
    def __init__(self, layer: _Optional[str] = ..., rect: _Optional[_Union[Rect, _Mapping]] = ...) -> None: ...

class Conflict(_message.Message):
    __slots__ = ("layer", "proposed", "rect", "owner", "other_net", "blockage_id", "distance_dbu", "spacing_dbu")
    LAYER_FIELD_NUMBER: _ClassVar[int]
    PROPOSED_FIELD_NUMBER: _ClassVar[int]
    RECT_FIELD_NUMBER: _ClassVar[int]
    OWNER_FIELD_NUMBER: _ClassVar[int]
    OTHER_NET_FIELD_NUMBER: _ClassVar[int]
    BLOCKAGE_ID_FIELD_NUMBER: _ClassVar[int]
    DISTANCE_DBU_FIELD_NUMBER: _ClassVar[int]
    SPACING_DBU_FIELD_NUMBER: _ClassVar[int]
    layer: str
    proposed: Rect
    rect: Rect
    owner: str
    other_net: str
    blockage_id: int
    distance_dbu: float
    spacing_dbu: int
    def __init__(self, layer: _Optional[str] = ..., proposed: _Optional[_Union[Rect, _Mapping]] = ..., rect: _Optional[_Union[Rect, _Mapping]] = ..., owner: _Optional[str] = ..., other_net: _Optional[str] = ..., blockage_id: _Optional[int] = ..., distance_dbu: _Optional[float] = ..., spacing_dbu: _Optional[int] = ...) -> None: ...

class LayerOption(_message.Message):
    __slots__ = ("layer", "preferred", "status", "legal", "blocked", "shapes", "cuts", "score", "conflicts")
    LAYER_FIELD_NUMBER: _ClassVar[int]
    PREFERRED_FIELD_NUMBER: _ClassVar[int]
    STATUS_FIELD_NUMBER: _ClassVar[int]
    LEGAL_FIELD_NUMBER: _ClassVar[int]
    BLOCKED_FIELD_NUMBER: _ClassVar[int]
    SHAPES_FIELD_NUMBER: _ClassVar[int]
    CUTS_FIELD_NUMBER: _ClassVar[int]
    SCORE_FIELD_NUMBER: _ClassVar[int]
    CONFLICTS_FIELD_NUMBER: _ClassVar[int]
    layer: str
    preferred: bool
    status: OptionStatus
    legal: bool
    blocked: bool
    shapes: _containers.RepeatedCompositeFieldContainer[PlacedShape]
    cuts: int
    score: ScoreReply
    conflicts: _containers.RepeatedCompositeFieldContainer[Conflict]
    def __init__(self, layer: _Optional[str] = ..., preferred: _Optional[bool] = ..., status: _Optional[_Union[OptionStatus, str]] = ..., legal: _Optional[bool] = ..., blocked: _Optional[bool] = ..., shapes: _Optional[_Iterable[_Union[PlacedShape, _Mapping]]] = ..., cuts: _Optional[int] = ..., score: _Optional[_Union[ScoreReply, _Mapping]] = ..., conflicts: _Optional[_Iterable[_Union[Conflict, _Mapping]]] = ...) -> None: ...

class JumperAdvice(_message.Message):
    __slots__ = ("applicable", "reason", "run_length_dbu", "kept_length_dbu", "hop_room_dbu", "limited_by", "hop_point", "hop_layer", "shapes", "score", "legal", "blocked", "conflicts")
    APPLICABLE_FIELD_NUMBER: _ClassVar[int]
    REASON_FIELD_NUMBER: _ClassVar[int]
    RUN_LENGTH_DBU_FIELD_NUMBER: _ClassVar[int]
    KEPT_LENGTH_DBU_FIELD_NUMBER: _ClassVar[int]
    HOP_ROOM_DBU_FIELD_NUMBER: _ClassVar[int]
    LIMITED_BY_FIELD_NUMBER: _ClassVar[int]
    HOP_POINT_FIELD_NUMBER: _ClassVar[int]
    HOP_LAYER_FIELD_NUMBER: _ClassVar[int]
    SHAPES_FIELD_NUMBER: _ClassVar[int]
    SCORE_FIELD_NUMBER: _ClassVar[int]
    LEGAL_FIELD_NUMBER: _ClassVar[int]
    BLOCKED_FIELD_NUMBER: _ClassVar[int]
    CONFLICTS_FIELD_NUMBER: _ClassVar[int]
    applicable: bool
    reason: str
    run_length_dbu: int
    kept_length_dbu: int
    hop_room_dbu: int
    limited_by: LimitedBy
    hop_point: Point
    hop_layer: str
    shapes: _containers.RepeatedCompositeFieldContainer[PlacedShape]
    score: ScoreReply
    legal: bool
    blocked: bool
    conflicts: _containers.RepeatedCompositeFieldContainer[Conflict]
    def __init__(self, applicable: _Optional[bool] = ..., reason: _Optional[str] = ..., run_length_dbu: _Optional[int] = ..., kept_length_dbu: _Optional[int] = ..., hop_room_dbu: _Optional[int] = ..., limited_by: _Optional[_Union[LimitedBy, str]] = ..., hop_point: _Optional[_Union[Point, _Mapping]] = ..., hop_layer: _Optional[str] = ..., shapes: _Optional[_Iterable[_Union[PlacedShape, _Mapping]]] = ..., score: _Optional[_Union[ScoreReply, _Mapping]] = ..., legal: _Optional[bool] = ..., blocked: _Optional[bool] = ..., conflicts: _Optional[_Iterable[_Union[Conflict, _Mapping]]] = ...) -> None: ...

class DiodeAdvice(_message.Message):
    __slots__ = ("found", "reason", "gate", "layer", "rects", "diff_area_um2", "worst_utilization")
    FOUND_FIELD_NUMBER: _ClassVar[int]
    REASON_FIELD_NUMBER: _ClassVar[int]
    GATE_FIELD_NUMBER: _ClassVar[int]
    LAYER_FIELD_NUMBER: _ClassVar[int]
    RECTS_FIELD_NUMBER: _ClassVar[int]
    DIFF_AREA_UM2_FIELD_NUMBER: _ClassVar[int]
    WORST_UTILIZATION_FIELD_NUMBER: _ClassVar[int]
    found: bool
    reason: str
    gate: str
    layer: str
    rects: _containers.RepeatedCompositeFieldContainer[Rect]
    diff_area_um2: float
    worst_utilization: float
    def __init__(self, found: _Optional[bool] = ..., reason: _Optional[str] = ..., gate: _Optional[str] = ..., layer: _Optional[str] = ..., rects: _Optional[_Iterable[_Union[Rect, _Mapping]]] = ..., diff_area_um2: _Optional[float] = ..., worst_utilization: _Optional[float] = ...) -> None: ...

class AdviseReply(_message.Message):
    __slots__ = ("score", "legal_as_is", "found", "rect", "width", "join_end", "far_end", "options", "best_option", "jumper", "diode", "explanation", "exact_scores", "warnings")
    SCORE_FIELD_NUMBER: _ClassVar[int]
    LEGAL_AS_IS_FIELD_NUMBER: _ClassVar[int]
    FOUND_FIELD_NUMBER: _ClassVar[int]
    RECT_FIELD_NUMBER: _ClassVar[int]
    WIDTH_FIELD_NUMBER: _ClassVar[int]
    JOIN_END_FIELD_NUMBER: _ClassVar[int]
    FAR_END_FIELD_NUMBER: _ClassVar[int]
    OPTIONS_FIELD_NUMBER: _ClassVar[int]
    BEST_OPTION_FIELD_NUMBER: _ClassVar[int]
    JUMPER_FIELD_NUMBER: _ClassVar[int]
    DIODE_FIELD_NUMBER: _ClassVar[int]
    EXPLANATION_FIELD_NUMBER: _ClassVar[int]
    EXACT_SCORES_FIELD_NUMBER: _ClassVar[int]
    WARNINGS_FIELD_NUMBER: _ClassVar[int]
    score: ScoreReply
    legal_as_is: bool
    found: bool
    rect: Rect
    width: int
    join_end: Point
    far_end: Point
    options: _containers.RepeatedCompositeFieldContainer[LayerOption]
    best_option: int
    jumper: JumperAdvice
    diode: DiodeAdvice
    explanation: _containers.RepeatedScalarFieldContainer[str]
    exact_scores: int
    warnings: _containers.RepeatedScalarFieldContainer[str]
    def __init__(self, score: _Optional[_Union[ScoreReply, _Mapping]] = ..., legal_as_is: _Optional[bool] = ..., found: _Optional[bool] = ..., rect: _Optional[_Union[Rect, _Mapping]] = ..., width: _Optional[int] = ..., join_end: _Optional[_Union[Point, _Mapping]] = ..., far_end: _Optional[_Union[Point, _Mapping]] = ..., options: _Optional[_Iterable[_Union[LayerOption, _Mapping]]] = ..., best_option: _Optional[int] = ..., jumper: _Optional[_Union[JumperAdvice, _Mapping]] = ..., diode: _Optional[_Union[DiodeAdvice, _Mapping]] = ..., explanation: _Optional[_Iterable[str]] = ..., exact_scores: _Optional[int] = ..., warnings: _Optional[_Iterable[str]] = ...) -> None: ...

class GetStatsRequest(_message.Message):
    __slots__ = ()
    def __init__(self) -> None: ...

class Stats(_message.Message):
    __slots__ = ("nets", "shapes", "hot_nets", "scores", "commits", "removals", "checks", "violations_seen", "deck", "uptime_s", "version")
    NETS_FIELD_NUMBER: _ClassVar[int]
    SHAPES_FIELD_NUMBER: _ClassVar[int]
    HOT_NETS_FIELD_NUMBER: _ClassVar[int]
    SCORES_FIELD_NUMBER: _ClassVar[int]
    COMMITS_FIELD_NUMBER: _ClassVar[int]
    REMOVALS_FIELD_NUMBER: _ClassVar[int]
    CHECKS_FIELD_NUMBER: _ClassVar[int]
    VIOLATIONS_SEEN_FIELD_NUMBER: _ClassVar[int]
    DECK_FIELD_NUMBER: _ClassVar[int]
    UPTIME_S_FIELD_NUMBER: _ClassVar[int]
    VERSION_FIELD_NUMBER: _ClassVar[int]
    nets: int
    shapes: int
    hot_nets: int
    scores: int
    commits: int
    removals: int
    checks: int
    violations_seen: int
    deck: str
    uptime_s: float
    version: str
    def __init__(self, nets: _Optional[int] = ..., shapes: _Optional[int] = ..., hot_nets: _Optional[int] = ..., scores: _Optional[int] = ..., commits: _Optional[int] = ..., removals: _Optional[int] = ..., checks: _Optional[int] = ..., violations_seen: _Optional[int] = ..., deck: _Optional[str] = ..., uptime_s: _Optional[float] = ..., version: _Optional[str] = ...) -> None: ...

class SessionRequest(_message.Message):
    __slots__ = ("seq", "commit", "remove", "score", "score_batch", "headroom", "check", "open_net", "close_net", "advise", "budget", "budgets")
    SEQ_FIELD_NUMBER: _ClassVar[int]
    COMMIT_FIELD_NUMBER: _ClassVar[int]
    REMOVE_FIELD_NUMBER: _ClassVar[int]
    SCORE_FIELD_NUMBER: _ClassVar[int]
    SCORE_BATCH_FIELD_NUMBER: _ClassVar[int]
    HEADROOM_FIELD_NUMBER: _ClassVar[int]
    CHECK_FIELD_NUMBER: _ClassVar[int]
    OPEN_NET_FIELD_NUMBER: _ClassVar[int]
    CLOSE_NET_FIELD_NUMBER: _ClassVar[int]
    ADVISE_FIELD_NUMBER: _ClassVar[int]
    BUDGET_FIELD_NUMBER: _ClassVar[int]
    BUDGETS_FIELD_NUMBER: _ClassVar[int]
    seq: int
    commit: CommitRequest
    remove: RemoveRequest
    score: ScoreRequest
    score_batch: ScoreBatchRequest
    headroom: HeadroomRequest
    check: CheckNetRequest
    open_net: OpenNetRequest
    close_net: CloseNetRequest
    advise: AdviseRequest
    budget: BudgetRequest
    budgets: BudgetsRequest
    def __init__(self, seq: _Optional[int] = ..., commit: _Optional[_Union[CommitRequest, _Mapping]] = ..., remove: _Optional[_Union[RemoveRequest, _Mapping]] = ..., score: _Optional[_Union[ScoreRequest, _Mapping]] = ..., score_batch: _Optional[_Union[ScoreBatchRequest, _Mapping]] = ..., headroom: _Optional[_Union[HeadroomRequest, _Mapping]] = ..., check: _Optional[_Union[CheckNetRequest, _Mapping]] = ..., open_net: _Optional[_Union[OpenNetRequest, _Mapping]] = ..., close_net: _Optional[_Union[CloseNetRequest, _Mapping]] = ..., advise: _Optional[_Union[AdviseRequest, _Mapping]] = ..., budget: _Optional[_Union[BudgetRequest, _Mapping]] = ..., budgets: _Optional[_Union[BudgetsRequest, _Mapping]] = ...) -> None: ...

class SessionError(_message.Message):
    __slots__ = ("code", "message", "field")
    CODE_FIELD_NUMBER: _ClassVar[int]
    MESSAGE_FIELD_NUMBER: _ClassVar[int]
    FIELD_FIELD_NUMBER: _ClassVar[int]
    code: int
    message: str
    field: str
    def __init__(self, code: _Optional[int] = ..., message: _Optional[str] = ..., field: _Optional[str] = ...) -> None: ...

class SessionReply(_message.Message):
    __slots__ = ("seq", "error", "commit", "remove", "score", "score_batch", "headroom", "check", "open_net", "close_net", "advise", "budget", "budgets")
    SEQ_FIELD_NUMBER: _ClassVar[int]
    ERROR_FIELD_NUMBER: _ClassVar[int]
    COMMIT_FIELD_NUMBER: _ClassVar[int]
    REMOVE_FIELD_NUMBER: _ClassVar[int]
    SCORE_FIELD_NUMBER: _ClassVar[int]
    SCORE_BATCH_FIELD_NUMBER: _ClassVar[int]
    HEADROOM_FIELD_NUMBER: _ClassVar[int]
    CHECK_FIELD_NUMBER: _ClassVar[int]
    OPEN_NET_FIELD_NUMBER: _ClassVar[int]
    CLOSE_NET_FIELD_NUMBER: _ClassVar[int]
    ADVISE_FIELD_NUMBER: _ClassVar[int]
    BUDGET_FIELD_NUMBER: _ClassVar[int]
    BUDGETS_FIELD_NUMBER: _ClassVar[int]
    seq: int
    error: SessionError
    commit: ShapeIds
    remove: RemoveReply
    score: ScoreReply
    score_batch: ScoreBatchReply
    headroom: HeadroomReply
    check: NetReport
    open_net: ShapeIds
    close_net: CloseNetReply
    advise: AdviseReply
    budget: BudgetReply
    budgets: BudgetsReply
    def __init__(self, seq: _Optional[int] = ..., error: _Optional[_Union[SessionError, _Mapping]] = ..., commit: _Optional[_Union[ShapeIds, _Mapping]] = ..., remove: _Optional[_Union[RemoveReply, _Mapping]] = ..., score: _Optional[_Union[ScoreReply, _Mapping]] = ..., score_batch: _Optional[_Union[ScoreBatchReply, _Mapping]] = ..., headroom: _Optional[_Union[HeadroomReply, _Mapping]] = ..., check: _Optional[_Union[NetReport, _Mapping]] = ..., open_net: _Optional[_Union[ShapeIds, _Mapping]] = ..., close_net: _Optional[_Union[CloseNetReply, _Mapping]] = ..., advise: _Optional[_Union[AdviseReply, _Mapping]] = ..., budget: _Optional[_Union[BudgetReply, _Mapping]] = ..., budgets: _Optional[_Union[BudgetsReply, _Mapping]] = ...) -> None: ...
