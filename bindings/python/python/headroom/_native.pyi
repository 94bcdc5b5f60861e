from typing import List, Optional, Tuple

FIELDS: List[str]
DECISION_COLUMNS: List[str]
OUTCOMES: List[str]
REASONS: List[str]
VERSION: str

def run(argv: List[str]) -> Tuple[str, List[str]]: ...
def replay(
    argv: List[str],
    arrays: Optional[Tuple[str, List[Tuple[str, str]], List[Tuple[str, str, bytes]]]] = ...,
    decisions: bool = ...,
) -> Tuple[str, List[str], List[List[Tuple[str, str, bytearray]]], List[Tuple[bytes, float]]]: ...
def fleet(parts: List[Tuple[bytes, float]], names: List[str], skipped: int) -> str: ...
def toml_from_json(text: str) -> str: ...
def expand(paths: List[str], strict: bool) -> Tuple[List[str], List[Tuple[str, str]]]: ...
