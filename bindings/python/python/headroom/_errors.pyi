class HeadroomError(Exception):
    message: str
    exit_code: int
    def __init__(self, message: str, exit_code: int = ...) -> None: ...
