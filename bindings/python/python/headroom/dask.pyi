from os import PathLike
from typing import Any, Dict, Mapping, Optional, Sequence, Union

_Path = Union[str, "PathLike[str]"]
_Value = Union[str, int, float]

def replay_fleet(
    source: Union[_Path, Sequence[_Path]],
    client: Optional[Any] = ...,
    *,
    device_column: str = ...,
    columns: Optional[Mapping[str, str]] = ...,
    strict: bool = ...,
    config: Optional[_Path] = ...,
    **settings: _Value,
) -> Dict[str, Any]:
    """{"logs": [one object per device], "fleet": {...}}, as `replay --format json`."""
    ...
