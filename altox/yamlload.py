"""Safe, located reading of plan files: bytes -> text -> plain Python data + a position map.

The plan reader never constructs arbitrary objects and never writes to the file.  It works
from the YAML *event* stream (libyaml's when PyYAML was built with it, else PyYAML's pure
Python parser) and builds dicts, lists and scalars itself, with an explicit stack, so that:

* only the standard scalar tags ``!!str``, ``!!int``, ``!!float``, ``!!bool``, ``!!null`` and
  the collection tags ``!!map`` and ``!!seq`` are accepted; any other tag (``!!python/...``,
  ``!!binary``, ``!!set``, ``!custom``) is an error;
* anchors (``&name``) and aliases (``*name``) are refused outright, so nothing can expand
  (no "billion laughs"); merge keys (``<<``) are refused too;
* duplicate keys are an error (YAML would silently keep the last one);
* keys are kept as the text the user wrote (``on:``, ``no:`` stay strings);
* nesting deeper than :data:`MAX_DEPTH` levels is an error;
* files larger than :data:`MAX_PLAN_BYTES` are refused before any parsing.

Every value's position is recorded in a :class:`PositionMap` keyed by its field path
(``("days", 3, "sleep")``), so that schema errors found later can name ``file:line:column``.
Timestamps are kept as the text written (a plan has no use for dates yet).

Why this module is long: it is one reader: safe YAML with positions, the file checks (regular file, size, encoding) and the data-file loader share the same event-level parser and its error messages.
"""

from __future__ import annotations

import os
import re
import stat
import unicodedata
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path

import yaml
from yaml.constructor import SafeConstructor
from yaml.nodes import ScalarNode
from yaml.resolver import Resolver

from altox.errors import ProfileError

#: libyaml's safe loader when PyYAML was built with it (the same safe constructors, parsed in C)
FAST_SAFE_LOADER = getattr(yaml, "CSafeLoader", yaml.SafeLoader)


@lru_cache(maxsize=None)
def load_data_file(name: str):
    """Parse ``altox/data/<name>.yaml``, one of altox's own (trusted) data files, safely and fast.

    Parsed once per process and shared: callers read the result and never change it.
    """
    from importlib.resources import files

    text = files("altox").joinpath(f"data/{name}.yaml").read_text(encoding="utf-8")
    return yaml.load(text, Loader=FAST_SAFE_LOADER)

__all__ = [
    "MAX_PLAN_BYTES",
    "MAX_DEPTH",
    "PositionMap",
    "read_plan_text",
    "parse_yaml",
    "format_path",
]

#: Largest plan file accepted, in bytes (1 MiB).  A 100-day expedition is about 20 KB.
MAX_PLAN_BYTES = 1024 * 1024
#: Deepest nesting of mappings and sequences accepted (a plan needs 4).
MAX_DEPTH = 32

_Y = "tag:yaml.org,2002:"
_SCALAR_TAGS = {_Y + "str", _Y + "int", _Y + "float", _Y + "bool", _Y + "null"}
_MAP_TAGS = {None, "!", _Y + "map"}
_SEQ_TAGS = {None, "!", _Y + "seq"}

_EventLoader = getattr(yaml, "CSafeLoader", None) or yaml.SafeLoader


@dataclass
class PositionMap:
    """Where each value (and each mapping key) of a plan was written.

    Attributes
    ----------
    values : dict
        Field path tuple -> (line, column), 1-based, of the value's first character.
    keys : dict
        Field path tuple -> (line, column), 1-based, of the key naming that field.
    """

    values: dict = field(default_factory=dict)
    keys: dict = field(default_factory=dict)

    def locate(self, loc: tuple, *, prefer_key: bool = False) -> tuple[int | None, int | None]:
        """Line and column for a field path; the nearest recorded ancestor if the path is absent.

        Parameters
        ----------
        loc : tuple
            Field path, e.g. ``("days", 3, "sleep")``.
        prefer_key : bool
            Point at the key (for unknown or duplicate keys) rather than at the value.

        Returns
        -------
        (int or None, int or None)
            1-based line and column, or ``(None, None)`` when nothing is known.
        """
        loc = tuple(loc)
        if prefer_key and loc in self.keys:
            return self.keys[loc]
        while True:
            if loc in self.values:
                return self.values[loc]
            if not loc:
                return (None, None)
            loc = loc[:-1]


def format_path(loc) -> str:
    """Field path tuple -> ``days[3].sleep`` (indices are 0-based, as in the data)."""
    out = ""
    for part in loc:
        if isinstance(part, int):
            out += f"[{part}]"
        else:
            out += ("." if out else "") + str(part)
    return out or "(top level)"


def _line_col_of_index(data, index: int) -> tuple[int, int]:
    nl = "\n" if isinstance(data, str) else b"\n"
    line = data.count(nl, 0, index) + 1
    col = index - (data.rfind(nl, 0, index) + 1) + 1
    return line, col


def _fail(path, line, column, message, *, field=None, value=None, expected=None):
    where = path
    if line is not None:
        where += f":{line}"
        if column is not None:
            where += f":{column}"
    raise ProfileError(f"{where}: {message}", path=path, line=line, column=column,
                       field=field, value=value, expected=expected)


def read_plan_text(path, *, noun: str = "plan", max_bytes: int = MAX_PLAN_BYTES) -> str:
    """Read a plan file as UTF-8 text, refusing anything that is not a small text file.

    The file is opened read-only; nothing is ever written to it.

    Parameters
    ----------
    path : str or os.PathLike
        The plan file.

    Returns
    -------
    str
        The file's text (a UTF-8 byte-order mark, if any, removed).

    Raises
    ------
    ProfileError
        Missing file, a directory or other non-regular file, unreadable, larger than
        :data:`MAX_PLAN_BYTES`, empty, binary (NUL bytes, UTF-16/32) or not valid UTF-8.
    """
    name = os.fspath(path)
    expected = "a UTF-8 YAML text file"
    example = " (e.g. profiles/trek-teskavor.yaml)" if noun == "plan" else ""
    try:
        st = os.stat(name)
    except FileNotFoundError:
        _fail(name, None, None, f"no such {noun} file; expected the path of a YAML {noun} file.",
              value=name, expected=expected)
    except OSError as exc:
        _fail(name, None, None, f"cannot read the {noun} file ({exc.strerror}); expected a readable "
              f"YAML {noun} file.", value=name, expected=expected)
    if stat.S_ISDIR(st.st_mode):
        _fail(name, None, None, f"this is a directory, not a {noun} file; expected the path of a YAML "
              f"{noun} file{example}.", value=name, expected=expected)
    if not stat.S_ISREG(st.st_mode):
        _fail(name, None, None, "this is not a regular file (a device, pipe or socket); expected a "
              f"YAML {noun} file.", value=name, expected=expected)
    if st.st_size > max_bytes:
        _fail(name, None, None, f"the file is {st.st_size:,} bytes, over the {max_bytes:,}-byte "
              f"limit for {noun} files; a {noun} file is a few kilobytes of YAML, so this is probably not one.",
              value=st.st_size, expected=f"at most {max_bytes:,} bytes")
    try:
        with open(name, "rb") as fh:
            data = fh.read(max_bytes + 1)
    except OSError as exc:
        _fail(name, None, None, f"cannot read the {noun} file ({exc.strerror}); expected a readable "
              f"YAML {noun} file.", value=name, expected=expected)
    if len(data) > max_bytes:  # grew since stat
        _fail(name, None, None, f"the file is over the {max_bytes:,}-byte limit for {noun} files.",
              value=len(data), expected=f"at most {max_bytes:,} bytes")
    return decode_plan_bytes(data, name, noun=noun)


def decode_plan_bytes(data: bytes, path: str = "<bytes>", *, noun: str = "plan") -> str:
    """Decode plan bytes as UTF-8, with located errors for binary and mis-encoded input.

    Parameters
    ----------
    data : bytes
        The file's content.
    path : str
        Name used in error messages.

    Returns
    -------
    str
        The text, without a UTF-8 byte-order mark.

    Raises
    ------
    ProfileError
        Empty, binary or not UTF-8.
    """
    expected = "a UTF-8 YAML text file"
    if data[:4] in (b"\xff\xfe\x00\x00", b"\x00\x00\xfe\xff") or data[:2] in (b"\xff\xfe", b"\xfe\xff"):
        _fail(path, 1, 1, "the file is UTF-16 or UTF-32 encoded (it starts with a byte-order mark); "
              "save it as UTF-8.", value=data[:4], expected=expected)
    if data.startswith(b"\xef\xbb\xbf"):
        data = data[3:]
    nul = data.find(b"\x00")
    if nul >= 0:
        line, col = _line_col_of_index(data, nul)
        _fail(path, line, col, f"the file contains a NUL byte at byte {nul}, so it is binary, not a "
              f"YAML {noun} file; expected a UTF-8 text file.", value=data[max(0, nul - 8):nul + 8],
              expected=expected)
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line, col = _line_col_of_index(data, exc.start)
        bad = data[exc.start:exc.start + 4]
        _fail(path, line, col, f"the bytes {bad!r} at byte {exc.start} are not valid UTF-8 "
              f"({exc.reason}); expected a UTF-8 text file (re-save it as UTF-8).",
              value=bad, expected=expected)
    if not text.strip():
        _fail(path, None, None, f"the {noun} file is empty; expected a YAML mapping"
              + (" starting with 'kind: expedition' or 'kind: flight'." if noun == "plan" else "."),
              value="", expected="a YAML mapping")
    return text


def _prefix(loc) -> str:
    return f"{format_path(loc)}: " if loc else ""


def _field(loc):
    return format_path(loc) if loc else None


def _short_tag(tag):
    return "!!" + tag[len(_Y):] if isinstance(tag, str) and tag.startswith(_Y) else tag


_resolver = Resolver()
_constructor = SafeConstructor()


def _unprintable(text: str):
    """The first character a terminal would act on or hide (controls other than tab and newline, and
    invisible format characters such as bidirectional overrides and zero-width spaces), or None."""
    for ch in text:
        if ch in "\t\n":
            continue
        if unicodedata.category(ch) in ("Cc", "Cf", "Cs", "Co", "Cn", "Zl", "Zp"):
            return ch
    return None


def _check_printable(text: str, path, line, col, here):
    if text.isascii() and text.isprintable():
        return
    ch = _unprintable(text)
    if ch is not None:
        name = unicodedata.name(ch, "a control character")
        _fail(path, line, col, f"{_prefix(here)}the text contains U+{ord(ch):04X} ({name.lower()}), which a "
              "terminal would act on or hide; expected printable text (letters, digits, punctuation, spaces).",
              field=_field(here), value=f"U+{ord(ch):04X}", expected="printable text")


def _scalar_value(event, path, here=(), noun="plan"):
    tag = event.tag
    line, col = event.start_mark.line + 1, event.start_mark.column + 1
    _check_printable(event.value, path, line, col, here)
    if tag is None or tag == "!":
        if tag is None and event.implicit[0]:
            tag = _resolver.resolve(ScalarNode, event.value, (True, False))
        else:
            tag = _Y + "str"
        if tag not in _SCALAR_TAGS:
            # implicit timestamps, '=' values and '<<' merge keys: keep the text
            return event.value
    elif tag not in _SCALAR_TAGS:
        _fail(path, line, col, f"{_prefix(here)}the YAML tag {_short_tag(event.tag)!r} is not "
              f"allowed in {noun} files, which hold only plain text, numbers, true/false, null, "
              "mappings and lists; remove the tag.", field=_field(here), value=event.value,
              expected="an untagged value")
    node = ScalarNode(tag, event.value, event.start_mark, event.end_mark)
    kind = tag[len(_Y):]
    if kind == "str":
        return event.value
    shown = event.value if len(event.value) <= 40 else event.value[:37] + "..."
    try:
        value = getattr(_constructor, f"construct_yaml_{kind}")(node)
        if kind == "null" and event.value not in ("", "~", "null", "Null", "NULL"):
            raise ValueError(event.value)
        if isinstance(value, int) and not isinstance(value, bool):
            float(value)  # an integer beyond any float (OverflowError) is no number a plan can use
    except OverflowError:
        _fail(path, line, col, f"{_prefix(here)}the number {shown!r} is too large; expected a number of "
              f"ordinary size (every number in a {noun} file is well below 1e300).", field=_field(here),
              value=shown, expected="a number below 1e300")
    except Exception:  # PyYAML's constructors fail in many ways on odd text under an explicit tag
        _fail(path, line, col, f"{_prefix(here)}{shown!r} cannot be read as {_short_tag(tag)}; expected "
              f"a value of that type, or the value without its tag.", field=_field(here), value=shown,
              expected=kind)
    return value


_SPLIT_TAIL_RE = re.compile(r"^\d{3}(?:[.,]\d+)*\s*[^\d\s,]")


def _check_comma_split(top, event, path, positions):
    """In a flow collection, ``2,810 m`` reads as the int 2 then the text ``810 m``: say so."""
    previous = top[5]
    if previous is None or not event.implicit[0] or event.tag is not None:
        return
    if not _SPLIT_TAIL_RE.match(event.value):
        return
    loc, head = previous
    joined = f"{head},{event.value}"
    line, col = positions.values.get(loc, (None, None))
    _fail(path, line, col, f"{format_path(loc)}: '{joined}' was split at its comma into {head} and "
          f"{event.value!r}: inside {{...}} or [...] a comma separates entries. Expected the value "
          f"quoted, \"{joined}\", or written without the thousands separator.",
          field=format_path(loc), value=joined, expected=f'"{joined}"')


def parse_yaml(text: str, path: str = "<string>", *, noun: str = "plan") -> tuple[object, PositionMap]:
    """Parse one YAML document into plain data, recording where every value was written.

    Parameters
    ----------
    text : str
        YAML text.
    path : str
        Name used in error messages.

    Returns
    -------
    data : object
        Dicts (string keys), lists, str, int, float, bool and None.
    positions : PositionMap
        Field path -> 1-based (line, column).

    Raises
    ------
    ProfileError
        Syntax errors (located by the YAML error mark), more than one document, tags other than
        the standard ones, anchors and aliases, merge keys, duplicate or non-text keys,
        nesting deeper than :data:`MAX_DEPTH`, text longer than :data:`MAX_PLAN_BYTES`.
    """
    if len(text) > MAX_PLAN_BYTES:
        _fail(path, None, None, f"the plan text is {len(text):,} characters, over the "
              f"{MAX_PLAN_BYTES:,} limit for {noun} files.", value=len(text),
              expected=f"at most {MAX_PLAN_BYTES:,} characters")
    positions = PositionMap()
    # stack entries: [container, loc, pending_key or None, key_mark, flow style?, last int value]
    stack: list[list] = []
    root = _NOTHING = object()
    documents = 0

    def add(value, loc_mark):
        nonlocal root
        if not stack:
            root = value
            positions.values[()] = loc_mark
            return ()
        top = stack[-1]
        container, loc = top[0], top[1]
        if isinstance(container, list):
            child = loc + (len(container),)
            container.append(value)
            positions.values[child] = loc_mark
            return child
        key = top[2]
        child = loc + (key,)
        container[key] = value
        positions.values[child] = loc_mark
        positions.keys[child] = top[3]
        top[2] = None
        return child

    def want_key(event) -> bool:
        return bool(stack) and isinstance(stack[-1][0], dict) and stack[-1][2] is None

    try:
        for event in yaml.parse(text, Loader=_EventLoader):
            mark = getattr(event, "start_mark", None)
            line_col = (mark.line + 1, mark.column + 1) if mark is not None else (None, None)
            if isinstance(event, yaml.DocumentStartEvent):
                documents += 1
                if documents > 1:
                    _fail(path, *line_col, "the file holds more than one YAML document ('---'); "
                          f"expected exactly one {noun} per file.", value="---",
                          expected="one YAML document")
                continue
            if isinstance(event, (yaml.StreamStartEvent, yaml.StreamEndEvent, yaml.DocumentEndEvent)):
                continue
            here = ()
            if stack:
                top = stack[-1]
                if isinstance(top[0], list):
                    here = top[1] + (len(top[0]),)
                else:
                    here = top[1] + ((top[2],) if top[2] is not None else ())
            if isinstance(event, yaml.AliasEvent):
                _fail(path, *line_col, f"{_prefix(here)}the alias '*{event.anchor}' is not allowed: {noun} files may not "
                      "use anchors or aliases (they can expand without limit); write the value out.",
                      field=_field(here), value="*" + str(event.anchor),
                      expected="a value written out in full")
            if isinstance(event, (yaml.MappingEndEvent, yaml.SequenceEndEvent)):
                stack.pop()
                continue
            anchor = getattr(event, "anchor", None)
            if anchor is not None:
                _fail(path, *line_col, f"{_prefix(here)}the anchor '&{anchor}' is not allowed: {noun} "
                      "files may not use anchors or aliases; write each value out.",
                      field=_field(here), value="&" + str(anchor),
                      expected="a value without an anchor")
            if stack and stack[-1][4] and isinstance(event, yaml.ScalarEvent):
                # in a mapping the tail of a split value arrives as the next key; a value after a key
                # never is one (the previous sibling's number belongs to another field)
                if isinstance(stack[-1][0], list) or want_key(event):
                    _check_comma_split(stack[-1], event, path, positions)
                stack[-1][5] = None if want_key(event) else stack[-1][5]
            if want_key(event):
                if not isinstance(event, yaml.ScalarEvent):
                    _fail(path, *line_col, f"a mapping key in {format_path(stack[-1][1])} is a "
                          f"{'mapping' if isinstance(event, yaml.MappingStartEvent) else 'list'}; "
                          "expected a plain field name.", field=format_path(stack[-1][1]),
                          expected="a field name")
                if event.tag not in (None, "!", _Y + "str"):
                    _fail(path, *line_col, f"the key {event.value!r} carries the tag {event.tag!r}; "
                          "expected a plain field name.", field=format_path(stack[-1][1]),
                          value=event.value, expected="a field name")
                key = event.value
                loc = stack[-1][1]
                _check_printable(key, path, *line_col, loc)
                if key == "<<" and event.implicit[0]:
                    _fail(path, *line_col, f"merge keys ('<<') are not allowed in {noun} files "
                          f"(in {format_path(loc)}); write the fields out.", field=format_path(loc),
                          value="<<", expected="a field name")
                if key in stack[-1][0]:
                    first = positions.keys.get(loc + (key,), (None, None))
                    _fail(path, *line_col, f"{format_path(loc + (key,))}: the key {key!r} appears a "
                          f"second time (first at line {first[0]}); expected each key once.",
                          field=format_path(loc + (key,)), value=key, expected="each key once")
                stack[-1][2] = key
                stack[-1][3] = line_col
                continue
            if isinstance(event, yaml.ScalarEvent):
                value = _scalar_value(event, path, here, noun)
                child = add(value, line_col)
                if stack:
                    plain_int = (event.tag is None and event.implicit[0] and isinstance(value, int)
                                 and not isinstance(value, bool))
                    stack[-1][5] = (child, event.value) if plain_int else None
            elif isinstance(event, (yaml.MappingStartEvent, yaml.SequenceStartEvent)):
                is_map = isinstance(event, yaml.MappingStartEvent)
                if event.tag not in (_MAP_TAGS if is_map else _SEQ_TAGS):
                    _fail(path, *line_col, f"{_prefix(here)}the YAML tag "
                          f"{_short_tag(event.tag)!r} is not allowed in {noun} files, which hold "
                          "only plain text, numbers, true/false, null, mappings and lists; remove "
                          "the tag.", field=_field(here),
                          value=event.tag,
                          expected="an untagged mapping or list")
                if len(stack) >= MAX_DEPTH:
                    _fail(path, *line_col, f"the YAML is nested more than {MAX_DEPTH} levels deep; "
                          f"a {noun} file needs four or five.", value=len(stack),
                          expected=f"at most {MAX_DEPTH} levels")
                container = {} if is_map else []
                loc = add(container, line_col)
                if stack:
                    stack[-1][5] = None
                stack.append([container, loc, None, (None, None), bool(event.flow_style), None])
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        line = mark.line + 1 if mark is not None else None
        col = mark.column + 1 if mark is not None else None
        what = " ".join(s for s in (exc.context, exc.problem) if s)
        if mark is not None and 0 <= mark.index < len(text) and text[mark.index] == "\t":
            what += " (a tab character: YAML indentation must use spaces)"
        _fail(path, line, col, f"YAML syntax error: {what}; expected valid YAML (check the "
              "indentation, and quote values containing ':' or '#').", value=None,
              expected="valid YAML")
    except yaml.reader.ReaderError as exc:
        line, col = _line_col_of_index(text, exc.position)
        _fail(path, line, col, f"the character {chr(exc.character)!r} (code {exc.character:#x}) is not "
              "allowed in YAML; expected printable text.", value=chr(exc.character),
              expected="printable text")
    except yaml.YAMLError as exc:  # pragma: no cover - other parser failures
        _fail(path, None, None, f"YAML error: {exc}; expected valid YAML.", expected="valid YAML")
    if root is _NOTHING:
        _fail(path, None, None, f"the {noun} file holds no YAML data (only comments or blank lines); "
              "expected a YAML mapping.",
              value="", expected="a YAML mapping")
    return root, positions


def read_plan_data(path) -> tuple[object, PositionMap, str]:
    """Read and parse a plan file: (data, positions, text)."""
    text = read_plan_text(path)
    data, positions = parse_yaml(text, os.fspath(path))
    return data, positions, text


def plan_dir(path) -> Path:
    """Directory that relative paths inside a plan are resolved against."""
    return Path(os.fspath(path)).resolve().parent
