"""Type stubs of the extension module ``pinflow._native`` (Rust, PyO3).

The public API is ``pinflow`` (``pinflow/__init__.py``); this module returns
the library's own renderings as strings: JSON reports, CSV tables, text.
"""

from typing import Any, Dict, List, Optional, Tuple, Union

__version__: str
FLOW_OPTIONS: List[str]

class InputError(Exception):
    """Bad input: a model file, a keyword argument or a parameter point."""

    file: str
    key: str
    message: str

class RunError(Exception):
    """A run that failed (an integration, a file that cannot be written)."""

class Model:
    @staticmethod
    def load(path: str) -> "Model": ...
    @staticmethod
    def from_toml(text: str, file: str = "<string>") -> "Model": ...
    @property
    def name(self) -> str: ...
    @property
    def file(self) -> str: ...
    @property
    def source(self) -> str: ...
    def params(self) -> List[Tuple[str, float]]: ...
    def terms(self) -> List[str]: ...
    def dims(
        self,
        point: Dict[str, float],
        pin: List[str],
        wires: Optional[List[Union[int, str]]] = None,
        force: bool = False,
    ) -> Tuple[str, str, str]: ...
    def flow(
        self,
        point: Dict[str, float],
        options: Dict[str, Any],
        out: Optional[str] = None,
        force: bool = False,
    ) -> Tuple[str, str, str, str]: ...
    def scan(
        self,
        point: Dict[str, float],
        x: Optional[str],
        y: Optional[str],
        options: Dict[str, Any],
        out: str,
        threads: Optional[int] = None,
        force: bool = False,
        color_by: str = "phase",
        overwrite: bool = False,
    ) -> str: ...
    def hunt(
        self,
        point: Dict[str, float],
        max_dim: float,
        charge: Union[int, str],
        spin: Union[int, str],
        range: Optional[int],
        momentum: Optional[str],
        force: bool,
        symmetry: Union[str, List[str], None] = None,
        coupling: Optional[float] = None,
    ) -> Tuple[str, str, str, str]: ...
    def edges(
        self,
        point: Dict[str, float],
        pin: List[str],
        window: Optional[int],
        options: Dict[str, Any],
        force: bool = False,
    ) -> Tuple[str, str, str]: ...

def run_cli(argv: List[str]) -> int: ...
