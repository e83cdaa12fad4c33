"""Read a case file: TOML → validated `Case` (SI floats), or one `CaseError` line.

The message always names the file and the key, shows the value that was given and says what
would be accepted, so that an engineer can fix the case without reading a traceback.
"""

from __future__ import annotations

import difflib
import tomllib
import types
import typing
from dataclasses import dataclass
from pathlib import Path

from pydantic import BaseModel, ValidationError

from harvester.case.schema import Case
from harvester.errors import CaseError
from harvester.materials import find_material

MAX_CASE_BYTES = 1_000_000


@dataclass(frozen=True)
class LoadedCase:
    """A validated case and where it came from (data files are relative to it)."""

    case: Case
    path: Path

    @property
    def name(self) -> str:
        return self.path.name

    def data_file(self, relative: str, key: str) -> Path:
        """Resolve a path given in the case file, relative to the case file."""
        path = (self.path.parent / relative).resolve()
        if not path.is_file():
            raise CaseError(f"data file {relative!r} not found (looked for {path})",
                            file=str(self.path), key=key)
        return path


def load_case(path: str | Path) -> LoadedCase:
    """Read and validate a case file; raise CaseError naming file and key on bad input."""
    path = Path(path)
    file = str(path)
    if not path.exists():
        raise CaseError("case file not found", file=file)
    if not path.is_file():
        raise CaseError("is not a file", file=file)
    size = path.stat().st_size
    if size > MAX_CASE_BYTES:
        raise CaseError(f"case file is {size} bytes; the limit is {MAX_CASE_BYTES} bytes",
                        file=file)
    try:
        text = path.read_text(encoding="utf-8")
    except UnicodeDecodeError:
        raise CaseError("is not UTF-8 text (a case file is TOML)", file=file) from None
    return parse_case(text, path)


def parse_case(text: str, path: Path) -> LoadedCase:
    file = str(path)
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise CaseError(f"malformed TOML: {exc}", file=file) from None
    try:
        case = Case.model_validate(data)
    except ValidationError as exc:
        raise _translate(exc, data, file) from None
    _check_materials(case, file)
    _check_data_files(case, path)
    return LoadedCase(case=case, path=path.resolve())


def _check_materials(case: Case, file: str) -> None:
    wanted = []
    if case.beam is not None:
        wanted.append(("beam.substrate.material", case.beam.substrate.material, "substrate"))
        if case.beam.piezo is not None:
            wanted.append(("beam.piezo.material", case.beam.piezo.material, "piezo"))
    for section in ("tip_magnet", "fixed_magnet"):
        magnet = getattr(case, section)
        if magnet is not None:
            wanted.append((f"{section}.material", magnet.material, "magnet"))
    for key, name, kind in wanted:
        try:
            find_material(name, kind)
        except KeyError as exc:
            raise CaseError(exc.args[0], file=file, key=key) from None


def _check_data_files(case: Case, path: Path) -> None:
    excitation = case.excitation
    for kind in ("psd", "record"):
        spec = getattr(excitation, kind, None)
        if spec is not None:
            LoadedCase(case, path).data_file(spec.file, f"excitation.{kind}.file")


# --- pydantic errors → one line ----------------------------------------------------------------
def _translate(exc: ValidationError, data: dict, file: str) -> CaseError:
    errors = exc.errors()
    # an unknown key usually explains a "missing" one (a typo), so report it first
    error = next((e for e in errors if e["type"] == "extra_forbidden"), errors[0])
    loc = [p for p in error["loc"] if not _is_union_tag(p)]
    key = ".".join(str(p) for p in loc) or "(top level)"
    kind = error["type"]
    given = error.get("input")
    if kind == "extra_forbidden":
        known = _known_keys(loc[:-1])
        close = difflib.get_close_matches(str(loc[-1]), known, n=1, cutoff=0.5)
        hint = f"did you mean {close[0]!r}? " if close else ""
        return CaseError(f"unknown key; {hint}known keys here: {', '.join(known)}",
                         file=file, key=key)
    if kind == "missing":
        return CaseError("missing required value", file=file, key=key)
    limit = (error.get("ctx") or {}).get("le")
    if kind == "less_than_equal" and limit is not None:
        return CaseError(f"{given!r} is beyond the limit of {limit}", file=file, key=key)
    message = str(error["msg"])
    if message.startswith("Value error, "):
        message = message[len("Value error, "):]
    elif given is not None and not isinstance(given, dict):
        message = f"{given!r}: {message}"
    return CaseError(message, file=file, key=key)


def _is_union_tag(part: object) -> bool:
    # pydantic inserts the union member's type name (e.g. "float", "tuple[...]") in locations
    return isinstance(part, str) and ("[" in part or part in ("float", "int", "str", "none"))


def _model_at(loc: list) -> type[BaseModel] | None:
    model: type[BaseModel] | None = Case
    for part in loc:
        if model is None or not isinstance(part, str):
            continue
        field = model.model_fields.get(part)
        if field is None:
            field = next((f for f in model.model_fields.values() if f.alias == part), None)
        model = _first_model(field.annotation) if field is not None else None
    return model


def _first_model(annotation) -> type[BaseModel] | None:
    if isinstance(annotation, type) and issubclass(annotation, BaseModel):
        return annotation
    if isinstance(annotation, types.UnionType) or typing.get_origin(annotation) is not None:
        for arg in typing.get_args(annotation):
            found = _first_model(arg)
            if found is not None:
                return found
    return None


def _known_keys(loc: list) -> list[str]:
    model = _model_at(loc)
    if model is None:
        return []
    return [f.alias or name for name, f in model.model_fields.items()]
