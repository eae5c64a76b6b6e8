"""The reader: one test per dialect feature (issue: reader and circuit graph, point 2).

Syntax follows the SPICE3 user's manual and the ngspice manual ("Circuit description"
chapter: title line, comments, continuation lines, element and control lines).
"""

from __future__ import annotations

from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from drivelint.diagnostics import DiagnosticError, Severity
from drivelint.netlist.reader import (
    LogicalLine,
    ReadOptions,
    _LineParser,
    _Reader,
    read_deck,
    split_flat,
    split_grouped,
    strip_inline_comment,
)
from drivelint.netlist.statements import (
    Assign,
    Element,
    Expr,
    GlobalCard,
    Group,
    ModelCard,
    OptionCard,
    ParamCard,
    Subckt,
    TranCard,
    Word,
)


def read(text: str, **kwargs: object):
    return read_deck("deck.cir", ReadOptions(**kwargs), text=text)  # type: ignore[arg-type]


def elements(deck):
    return [s for s in deck.statements if isinstance(s, Element)]


def errors(deck):
    return [d for d in deck.diagnostics if d.severity is Severity.ERROR]


def test_title_line_is_not_a_statement() -> None:
    deck = read("R1 a b 1k\nR2 a b 2k\n")
    assert deck.title == "R1 a b 1k"
    assert [e.name for e in elements(deck)] == ["r2"]


def test_full_line_comments_and_blank_lines_are_skipped() -> None:
    deck = read("title\n* a comment\n\n   * indented comment\nR1 a b 1k\n")
    assert [e.name for e in elements(deck)] == ["r1"]
    assert elements(deck)[0].span.line == 5


@pytest.mark.parametrize(
    "line, kept",
    [
        ("R1 a b 1k ; trailing", "R1 a b 1k "),
        ("R1 a b 1k $ trailing", "R1 a b 1k "),
        ("R1 n$1 b 1k", "R1 n$1 b 1k"),  # '$' inside a name is not a comment
        ("B1 a 0 V='1;2'", "B1 a 0 V='1;2'"),  # not inside a quoted expression
        ("R1 a b {x} ; c", "R1 a b {x} "),
    ],
)
def test_inline_comments(line: str, kept: str) -> None:
    assert strip_inline_comment(line) == kept


def test_case_insensitive_names_and_cards() -> None:
    deck = read("t\nRLOAD OUT Gnd 10K\n.MODEL DX D(IS=1E-14)\n")
    (r,) = elements(deck)
    assert r.name == "rload"
    assert [f.text for f in r.fields if isinstance(f, Word)] == ["out", "gnd", "10k"]
    (model,) = [s for s in deck.statements if isinstance(s, ModelCard)]
    assert model.name == "dx" and model.type == "d" and model.params[0].key == "is"


def test_continuation_lines_keep_physical_positions() -> None:
    deck = read("t\nR1 a\n* interleaved comment\n+ b\n+   4.7k\n")
    (r,) = elements(deck)
    a, b, value = r.fields
    assert (a.span.line, a.span.column) == (2, 4)
    assert (b.span.line, b.span.column) == (4, 3)
    assert (value.span.line, value.span.column) == (5, 5)


def test_stray_continuation_is_a_diagnostic() -> None:
    deck = read("t\n+ 1k\nR1 a b 1\n")
    (d,) = errors(deck)
    assert (d.span.line, d.span.column) == (2, 1)
    assert "continuation" in d.message
    assert len(elements(deck)) == 1


def test_element_fields_groups_expressions_and_assignments() -> None:
    deck = read("t\nV1 in 0 PULSE(0 5 {td} 1n 1n 5u 10u) AC 1\nM1 d g s s nch W=10u L='2*lmin'\n")
    v1, m1 = elements(deck)
    assert isinstance(v1.fields[3], Group)
    group = v1.fields[3]
    assert isinstance(group.items[2], Expr) and group.items[2].text == "td"
    width, length = m1.fields[-2:]
    assert isinstance(width, Assign) and width.key == "w" and isinstance(width.value, Word)
    assert isinstance(length, Assign) and isinstance(length.value, Expr)
    assert length.value.text == "2*lmin"


def test_commas_separate_group_items() -> None:
    deck = read("t\nV1 a 0 PULSE(0, 5, 0, 1n, 1n, 1u, 2u)\n")
    group = elements(deck)[0].fields[3]
    assert isinstance(group, Group) and len(group.items) == 7


@pytest.mark.parametrize("letter", list("RCLKDQMJVIEFGHBSWX"))
def test_every_element_letter_is_read(letter: str) -> None:
    deck = read(f"t\n{letter}1 a b c d e\n")
    (e,) = elements(deck)
    assert e.letter == letter.lower()


def test_unsupported_element_letter_warns_and_skips() -> None:
    deck = read("t\nU1 a 0 b urc_line L=1m N=4\nR1 a 0 1\n")
    assert [e.name for e in elements(deck)] == ["r1"]
    (warning,) = deck.diagnostics
    assert warning.severity is Severity.WARNING and "U" in warning.message


def test_model_card_forms() -> None:
    deck = read(
        "t\n.model d1 D(IS=1e-14 BV=100)\n.model d2 d is=2e-14\n"
        ".model q1 npn (bf=100\n+ vaf=50)\n.model vd vdmos pchan vto=-2\n"
    )
    models = {m.name: m for m in deck.statements if isinstance(m, ModelCard)}
    assert [p.key for p in models["d1"].params] == ["is", "bv"]
    assert [p.key for p in models["d2"].params] == ["is"]
    assert [p.key for p in models["q1"].params] == ["bf", "vaf"]
    assert [p.key for p in models["vd"].params] == ["pchan", "vto"]


def test_subckt_with_params_and_nesting() -> None:
    deck = read(
        "t\n.subckt outer a b params: r0=1k gain={2*r0}\n"
        ".subckt inner x y\nR1 x y 1\n.ends inner\nX1 a b inner\n.ends outer\n"
    )
    (outer,) = [s for s in deck.statements if isinstance(s, Subckt)]
    assert [p.text for p in outer.ports] == ["a", "b"]
    assert [(p.key, type(p.value).__name__) for p in outer.params] == [
        ("r0", "Word"),
        ("gain", "Expr"),
    ]
    inner = [s for s in outer.body if isinstance(s, Subckt)]
    assert inner[0].name == "inner"


def test_subckt_errors() -> None:
    deck = read("t\n.ends\n.subckt open a b\nR1 a b 1\n")
    messages = [d.message for d in errors(deck)]
    assert any("'.ends' without" in m for m in messages)
    assert any("has no '.ends'" in m for m in messages)


def test_param_card_values_may_contain_spaces() -> None:
    deck = read("t\n.param a = 2 * b  b=3 c={a+b} d='max(a, b)'\n")
    (card,) = [s for s in deck.statements if isinstance(s, ParamCard)]
    values = {a.key: a.value.text for a in card.assigns if isinstance(a.value, Expr)}
    assert values == {"a": "2 * b", "b": "3", "c": "a+b", "d": "max(a, b)"}


def test_global_option_tran_cards() -> None:
    deck = read("t\n.global vdd vss\n.options reltol=1e-4\n.tran 1n 10u uic\n")
    (g,) = [s for s in deck.statements if isinstance(s, GlobalCard)]
    assert [n.text for n in g.nets] == ["vdd", "vss"]
    assert any(isinstance(s, OptionCard) for s in deck.statements)
    (tran,) = [s for s in deck.statements if isinstance(s, TranCard)]
    assert [f.text for f in tran.fields if isinstance(f, Word)] == ["1n", "10u", "uic"]


def test_end_card_stops_reading() -> None:
    deck = read("t\nR1 a b 1\n.end\nR2 a b 1\n")
    assert [e.name for e in elements(deck)] == ["r1"]


@pytest.mark.parametrize(
    "card",
    [
        ".op",
        ".ac dec 10 1 1meg",
        ".dc v1 0 5 1",
        ".meas tran t1 trig v(a) val=1 rise=1",
        ".save v(a)",
        ".print tran v(a)",
        ".plot tran v(a)",
        ".ic v(a)=0",
        ".temp 27",
        ".four 1k v(a)",
        ".nodeset v(a)=1",
    ],
)
def test_analysis_cards_are_skipped_silently(card: str) -> None:
    deck = read(f"t\nR1 a 0 1\n{card}\n")
    assert deck.diagnostics == ()


def test_control_block_is_skipped() -> None:
    deck = read("t\n.control\nrun\nR9 not an element\n.endc\nR1 a 0 1\n")
    assert [e.name for e in elements(deck)] == ["r1"]
    assert deck.diagnostics == ()


def test_unknown_dot_card_warns() -> None:
    deck = read("t\n.frobnicate 1 2\nR1 a 0 1\n")
    (d,) = deck.diagnostics
    assert d.severity is Severity.WARNING and ".frobnicate" in d.message
    assert (d.span.line, d.span.column) == (2, 1)


def test_line_that_is_not_a_statement() -> None:
    deck = read("t\n%garbage here\n")
    (d,) = errors(deck)
    assert "does not start a statement" in d.message and d.source_line == "%garbage here"


def test_syntax_errors_name_line_and_column() -> None:
    deck = read("t\nV1 a 0 PULSE(0 5 1n\nV2 a 0 PULSE 0 5)\nR1 a b {x\nR2 a b PULSE(=3)\n")
    found = {d.span.line: d for d in errors(deck)}
    assert "unbalanced parenthesis" in found[2].message
    assert "')' without '('" in found[3].message and found[3].span.column == 17
    assert "never closed" in found[4].message and found[4].span.column == 8
    assert "'='" in found[5].message


def test_directive_comments_are_kept() -> None:
    deck = read("t\n* drivelint: accept dc-hold M1 -- fitted charge pump\nR1 a 0 1\n")
    (directive,) = deck.directives
    assert directive.text == "accept dc-hold M1 -- fitted charge pump"
    assert directive.span.line == 2


# -- includes and libraries ------------------------------------------------------------------


def write(path: Path, text: str) -> Path:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text, encoding="utf-8")
    return path


def test_include_relative_to_including_file(tmp_path: Path) -> None:
    write(tmp_path / "models" / "parts.lib", ".model dx d is=1e-15\nR9 a 0 1\n")
    top = write(tmp_path / "top.cir", "t\n.include models/parts.lib\nR1 a 0 1\n")
    deck = read_deck(top, ReadOptions(root=tmp_path))
    assert deck.diagnostics == ()
    assert [e.name for e in elements(deck)] == ["r9", "r1"]
    assert elements(deck)[0].span.path.endswith("parts.lib")
    assert len(deck.files) == 2


def test_include_through_search_path(tmp_path: Path) -> None:
    write(tmp_path / "lib" / "common.inc", "R5 a 0 1\n")
    top = write(tmp_path / "design" / "top.cir", 't\n.inc "common.inc"\n')
    deck = read_deck(top, ReadOptions(root=tmp_path, search_path=(tmp_path / "lib",)))
    assert [e.name for e in elements(deck)] == ["r5"]


def test_lib_sections(tmp_path: Path) -> None:
    write(
        tmp_path / "corners.lib",
        "* corners\n.lib fast\n.param k=2\nR1 a 0 1\n.endl fast\n"
        ".lib slow\n.param k=3\nR2 a 0 1\n.endl slow\n",
    )
    top = write(
        tmp_path / "top.cir", "t\n.lib corners.lib slow\n.lib inline\nR8 a 0 1\n.endl\nR3 a 0 1\n"
    )
    deck = read_deck(top, ReadOptions(root=tmp_path))
    assert deck.diagnostics == ()
    assert [e.name for e in elements(deck)] == ["r2", "r3"]


def test_lib_missing_section(tmp_path: Path) -> None:
    write(tmp_path / "c.lib", ".lib a\n.endl\n")
    top = write(tmp_path / "top.cir", "t\n.lib c.lib b\n")
    (d,) = errors(read_deck(top, ReadOptions(root=tmp_path)))
    assert "section 'b' not found" in d.message and d.span.line == 2


def test_include_cycle_depth_missing_dir_binary(tmp_path: Path) -> None:
    write(tmp_path / "a.inc", ".include b.inc\n")
    write(tmp_path / "b.inc", ".include a.inc\n")
    (tmp_path / "adir").mkdir()
    (tmp_path / "bin.inc").write_bytes(b"R1 a b\x00\x01\x02")
    top = write(
        tmp_path / "top.cir",
        "t\n.include a.inc\n.include nothere.inc\n.include adir\n.include bin.inc\n",
    )
    deck = read_deck(top, ReadOptions(root=tmp_path))
    messages = " | ".join(d.message for d in errors(deck))
    assert "include cycle" in messages
    # A missing include is a warning: the deck is read without it (a partial result).
    assert any(
        "'nothere.inc' not found" in d.message and d.severity is Severity.WARNING
        for d in deck.diagnostics
    )
    assert [m.name for m in deck.missing] == ["nothere.inc"]
    assert "is a directory" in messages
    assert "binary file" in messages


def test_include_depth_limit(tmp_path: Path) -> None:
    for index in range(5):
        write(tmp_path / f"n{index}.inc", f".include n{index + 1}.inc\n")
    write(tmp_path / "n5.inc", "R1 a 0 1\n")
    top = write(tmp_path / "top.cir", "t\n.include n0.inc\n")
    from drivelint.limits import Limits

    deck = read_deck(top, ReadOptions(root=tmp_path, limits=Limits(max_include_depth=3)))
    (d,) = errors(deck)
    assert "max_include_depth" in d.message


def test_include_outside_root_is_refused(tmp_path: Path) -> None:
    write(tmp_path / "secret.txt", "R1 a 0 1\n")
    top = write(tmp_path / "project" / "top.cir", "t\n.include ../secret.txt\n")
    refused = read_deck(top, ReadOptions(root=tmp_path / "project"))
    (d,) = errors(refused)
    assert "outside the project root" in d.message and d.span.line == 2
    allowed = read_deck(top, ReadOptions(root=tmp_path / "project", allow_outside_root=True))
    assert errors(allowed) == [] and len(elements(allowed)) == 1


def test_file_errors_are_diagnostics(tmp_path: Path) -> None:
    from drivelint.limits import Limits

    missing = read_deck(tmp_path / "none.cir")
    assert "not found" in errors(missing)[0].message
    folder = read_deck(tmp_path)
    assert "directory" in errors(folder)[0].message
    big = write(tmp_path / "big.cir", "t\n" + "R1 a 0 1\n" * 100)
    limited = read_deck(big, ReadOptions(limits=Limits(max_file_bytes=100)))
    assert "max_file_bytes" in errors(limited)[0].message


def test_latin1_file_is_read_with_a_note(tmp_path: Path) -> None:
    path = tmp_path / "l1.cir"
    path.write_bytes("t\n* 10 \u00b5F\nR1 a 0 1\n".encode("latin-1"))
    deck = read_deck(path)
    assert len(elements(deck)) == 1
    assert deck.diagnostics[0].severity is Severity.NOTE


# -- the fast path agrees with the grammar ---------------------------------------------------

_token = st.text(alphabet="abcxyz019.-_+$:*/", min_size=1, max_size=6)
_expr = st.text(alphabet="abc12+*/ ", min_size=0, max_size=6).map(lambda s: "{" + s + "}")
_field = st.one_of(
    _token,
    _expr,
    st.tuples(_token.filter(lambda t: t[0].isalpha()), st.one_of(_token, _expr)).map(
        lambda kv: f"{kv[0]}={kv[1]}"
    ),
)


@settings(max_examples=300, deadline=None)
@given(st.lists(_field, min_size=1, max_size=8), st.sampled_from([" ", "  ", "\t"]))
def test_flat_split_matches_grammar(fields: list[str], gap: str) -> None:
    text = gap.join(fields)
    line = LogicalLine(text, "p", [(0, 1, 1)])
    fast = split_flat(line)
    reader = _Reader(ReadOptions(), Path.cwd())
    try:
        slow = reader.parse_with_grammar(line, by_hand=False)
    except Exception:
        slow = None
    if fast is not None:
        assert fast == slow


# Lines with groups, assignments of groups, commas and stray punctuation: the hand reader
# (split_grouped) gives lark's fields for every line it accepts, and accepts every line
# lark does (so that lark is imported only to word an error).
_piece = st.one_of(
    _field,
    st.sampled_from(
        ["(", ")", ",", "=", "x=(", "pwl(", "(1,2)", "{a{b}}", "'q'", "{", "'", "tc=-1, 2"]
    ),
)
_gap = st.sampled_from([" ", "", "  ", "\t", ", "])


@settings(max_examples=600, deadline=None)
@given(st.lists(st.tuples(_piece, _gap), min_size=1, max_size=10))
def test_grouped_split_matches_grammar(pieces: list[tuple[str, str]]) -> None:
    text = "".join(piece + gap for piece, gap in pieces)
    line = LogicalLine(text, "p", [(0, 1, 1)])
    reader = _Reader(ReadOptions(), Path.cwd())
    try:
        slow = reader.parse_with_grammar(line, by_hand=False)
    except DiagnosticError:
        slow = None
    assert split_grouped(line) == slow, text


@pytest.mark.parametrize(
    "text",
    [
        "V1 in 0 PWL(0 0 1u 5)",
        "Q1 c b e qmod area=(2) tc=-7.8e-3, 3.7e-5",
        "X1 a b sub params: w={2*l} l='3u'",
        "B1 o 0 V={V(a) * (1 + 2)}",
        "M1 d g s s nch (w=1u l=(2u)) ( )",
    ],
)
def test_grouped_split_reads_dialect_lines(text: str) -> None:
    line = LogicalLine(text, "p", [(0, 1, 1)])
    fields = split_grouped(line)
    assert fields is not None
    assert fields == _Reader(ReadOptions(), Path.cwd()).parse_with_grammar(line, by_hand=False)


def test_grammar_is_loaded_once() -> None:
    assert _LineParser.get() is _LineParser.get()


# ---------------------------------------------------------------------------
# Dialect constructs (issue 8); each also has a deck in tests/dialects.


def test_param_card_of_many_assignments_is_read_in_one_pass(monkeypatch) -> None:
    # The nesting between candidate 'name=' matches is carried forward: every character
    # of the card is scanned once, however many assignments it holds (count, not time).
    from drivelint.limits import Limits
    from drivelint.netlist import reader as module

    scanned: list[int] = []
    original = module._advance

    def counting(text: str, start: int, end: int, state: object) -> None:
        scanned.append(end - start)
        original(text, start, end, state)  # type: ignore[arg-type]

    monkeypatch.setattr(module, "_advance", counting)
    for count in (1_000, 110_000):
        scanned.clear()
        # Continuation lines of 1,000 assignments: one logical line under max_line_chars.
        pieces = [
            " ".join(f"p{i}={i}" for i in range(j, min(j + 1000, count)))
            for j in range(0, count, 1000)
        ]
        text = "t\n.param " + "\n+ ".join(pieces) + "\n"
        deck = read(text, limits=Limits(max_line_chars=4_000_000))
        (card,) = [s for s in deck.statements if isinstance(s, ParamCard)]
        assert len(card.assigns) == count and card.assigns[-1].key == f"p{count - 1}"
        assert sum(scanned) <= len(text)


def test_if_blocks_unbalanced_are_diagnostics_with_position() -> None:
    deck = read("t\n.endif\n.if (a)\nR1 a 0 1\n.else\nR2 a 0 1\n.elseif (b)\n")
    found = [(d.span.line, d.message) for d in errors(deck)]
    assert (2, "'.endif' without an open '.if'") in found
    assert any(line == 7 and "after the '.else'" in m for line, m in found)
    assert any(line == 3 and "'.if' has no '.endif'" in m for line, m in found)


def test_if_nesting_is_bounded() -> None:
    from drivelint.limits import Limits

    text = "t\n" + ".if (1)\n" * 5 + "R1 a 0 1\n" + ".endif\n" * 5
    deck = read(text, limits=Limits(max_if_nesting=3))
    assert any("max_if_nesting" in d.message for d in errors(deck))


def test_func_card_and_behavioural_tail() -> None:
    deck = read("t\n.func g(a, b) 'a*b'\nB1 o 0 i=v(1) tc1=1m\n")
    func = deck.statements[0]
    assert func.name == "g" and func.params == ("a", "b") and func.body.text == "a*b"  # type: ignore[union-attr]
    (b1,) = elements(deck)
    keys = [f.key for f in b1.fields if isinstance(f, Assign)]
    assert keys == ["i", "tc1"]
    assert b1.fields[-2].value.text == "v(1)"  # type: ignore[union-attr]


def test_pwl_file_is_refused_outside_the_root(tmp_path: Path) -> None:
    write(tmp_path / "waves.txt", "0 0\n1u 5\n")
    top = write(tmp_path / "project" / "top.cir", "t\nV1 a 0 PWL FILE=../waves.txt\n")
    deck = read_deck(top, ReadOptions(root=tmp_path / "project"))
    assert any("outside the project root" in d.message for d in errors(deck))
