from os import PathLike
from typing import Any, Dict, List, Mapping, Optional, Sequence, Tuple, Union

import numpy.typing as npt

from ._errors import HeadroomError as HeadroomError

_Path = Union[str, "PathLike[str]"]
# A setting's value: a string with its unit ("-12.5dB", "1%") or a bare
# number in the unit its key names.
_Value = Union[str, int, float]
_Arrays = Union[Mapping[str, Any], Any]  # a dict of arrays or a pandas DataFrame

__version__: str
FIELDS: Tuple[str, ...]
DECISION_COLUMNS: Tuple[str, ...]
OUTCOMES: Tuple[str, ...]
REASONS: Tuple[str, ...]

class HeadroomWarning(UserWarning): ...

def run(*argv: Union[str, int, float, "PathLike[str]"]) -> str: ...
def budget(link: Union[_Path, Mapping[str, Any]], **options: Any) -> Dict[str, Any]: ...
def path_loss(**options: Any) -> Dict[str, Any]: ...
def fade(**options: Any) -> Dict[str, Any]: ...
def noise(**options: Any) -> Dict[str, Any]: ...
def battery(profile: _Path, **options: Any) -> Dict[str, Any]: ...
def replay(
    source: Union[_Path, Sequence[_Path], _Arrays],
    *,
    decisions: bool = ...,
    name: str = ...,
    header: Optional[Mapping[str, _Value]] = ...,
    columns: Optional[Mapping[str, str]] = ...,
    config: Optional[_Path] = ...,
    energy: Optional[_Path] = ...,
    interval: Optional[str] = ...,
    strict: bool = ...,
    **settings: _Value,
) -> Dict[str, Any]:
    """Keys: "logs", "fleet" (as `replay --format json`) and "decisions":
    one Dict[str, np.ndarray] per log."""
    ...

def decisions_frame(result: Mapping[str, Any], log: int = ...) -> Any: ...
def tune(
    logs: Union[_Path, Sequence[_Path]],
    *,
    sweep: Union[str, Sequence[str]] = ...,
    columns: Optional[Mapping[str, str]] = ...,
    config: Optional[_Path] = ...,
    energy: Optional[_Path] = ...,
    objective: Optional[str] = ...,
    each_device: bool = ...,
    incomparable: bool = ...,
    strict: bool = ...,
    threads: Optional[int] = ...,
    **settings: _Value,
) -> Dict[str, Any]: ...

Decisions = Dict[str, npt.NDArray[Any]]
