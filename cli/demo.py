"""``gfla demo``: a short tour on invented data, runnable on a fresh install.

The report is made of sections. A section is a function registered with
:func:`demo_section`; it receives the ``gfla`` module and returns a :class:`Section`.
Later work adds sections here (erasure coding, mixing layers, key schedules) without
touching the command itself.

All matrices and payloads below are invented for this tour (the "Wrenlock" toy cipher and
the "Hollowfen" archive do not exist). They illustrate the commands; they are not
reference values, and nothing is checked against them.
"""

from dataclasses import dataclass, field as dataclass_field

from .common import format_element, format_matrix, format_polynomial, format_vector, jsonable

__all__ = ["Section", "SECTIONS", "demo_section", "analyse_matrix", "build_sections",
           "report_json", "report_text"]

INVENTED_NOTE = ("All data in this demo is invented for illustration (the Wrenlock and Brackenmoth ciphers, "
                 "the Hollowfen and Fennick Bay archives do not exist); it is not a set of "
                 "reference values.")


@dataclass
class Section:
    """One part of the demo report.

    ``subject`` names the matrix that ``analysis`` describes; ``matrices`` is a list of
    ``(label, array)``; ``analysis`` maps an operation name to its result (or to
    ``{"refused": message, "certificate": {...}}``); ``findings`` is a list of
    ``(label, value)`` lines computed by gfla for this scenario.
    """

    name: str
    title: str
    story: str
    field: object
    subject: str = "matrix"
    matrices: list = dataclass_field(default_factory=list)
    analysis: dict = dataclass_field(default_factory=dict)
    findings: list = dataclass_field(default_factory=list)
    payload: dict = None
    text: str = None


SECTIONS = {}


def demo_section(name):
    """Register a section builder ``builder(gfla) -> Section`` under ``name``."""

    def register(builder):
        SECTIONS[name] = builder
        return builder

    return register


def _attempt(operation):
    from gfla.errors import InputError, MathError

    try:
        return operation()
    except MathError as exc:
        if isinstance(exc, InputError):
            raise
        certificate = exc.certificate() if callable(getattr(exc, "certificate", None)) else {}
        return {"refused": str(exc), "kind": type(exc).__name__,
                "certificate": jsonable(certificate)}


def analyse_matrix(F, A):
    """inverse, det, rank, charpoly, minpoly and order of a square matrix, by gfla.

    A refusal (a singular matrix has no inverse and no order) is recorded with its
    certificate instead of stopping the report.
    """
    return {
        "inverse": _attempt(lambda: F.inv(A, verify=True)),
        "det": int(F.det(A)),
        "rank": int(F.rank(A)),
        "charpoly": [int(c) for c in F.charpoly(A)],
        "minpoly": [int(c) for c in F.minpoly(A)],
        "order": _attempt(lambda: int(F.order(A))),
    }


# --------------------------------------------------------------------------- sections

@demo_section("mixing")
def mixing_section(gfla):
    """The column-mixing layer of the invented Wrenlock toy cipher."""
    F = gfla.field("GF(2^8)", modulus=0x11B)
    # An invented circulant with first row 07 01 05 0c.
    mixing = F.asarray([
        [0x07, 0x01, 0x05, 0x0C],
        [0x0C, 0x07, 0x01, 0x05],
        [0x05, 0x0C, 0x07, 0x01],
        [0x01, 0x05, 0x0C, 0x07],
    ], name="mixing matrix")
    section = Section(
        name="mixing",
        title="Wrenlock toy cipher: the column-mixing layer",
        story=("Wrenlock (an invented toy cipher) mixes each 4-byte column of its state "
               "with a 4x4 circulant over GF(2^8). Decryption needs the inverse layer; the "
               "order says after how many rounds the layer alone returns to the identity."),
        field=F,
        subject="mixing matrix",
        matrices=[("mixing matrix", mixing)],
    )
    section.analysis = analyse_matrix(F, mixing)
    inverse = section.analysis["inverse"]
    if not isinstance(inverse, dict):
        section.matrices.append(("inverse mixing matrix", inverse))
        back = F.matmul(inverse, mixing)
        section.findings.append(
            ("inverse times matrix is the identity (recomputed)",
             "yes" if (back == F.identity(4)).all() else "NO"))
    return section


# The invented Hollowfen archive spreads 4 data disks over 6 disks: disks 1-4 hold the
# data, disks 5 and 6 hold two parity combinations with invented coefficients.
_ARCHIVE_PARITY = [
    [0x01, 0x01, 0x01, 0x01],
    [0x01, 0x1D, 0x53, 0xA4],
]
_ARCHIVE_PAYLOAD = b"HOLLOWFEN LEDGER, SHELF 7 / ROLL"  # 32 invented bytes, 8 per data disk
_ARCHIVE_LOST = (2, 4)  # 1-based disk numbers


@demo_section("archive")
def archive_section(gfla):
    """Rebuilding two lost disks of the invented Hollowfen 6-disk archive."""
    F = gfla.field("GF(2^8)", modulus=0x11B)
    generator_rows = [[int(i == j) for j in range(4)] for i in range(4)] + _ARCHIVE_PARITY
    generator = F.asarray(generator_rows, name="archive generator matrix")
    payload = F.asarray([list(_ARCHIVE_PAYLOAD[8 * d: 8 * d + 8]) for d in range(4)],
                        name="payload")
    stripes = F.matmul(generator, payload)  # row d = the 8 bytes stored on disk d+1
    survivors = [d for d in range(6) if d + 1 not in _ARCHIVE_LOST]
    decoding = generator[survivors]
    section = Section(
        name="archive",
        title="Hollowfen archive: rebuilding two lost disks",
        story=("The Hollowfen archive (invented) stores 4 data disks plus 2 parity disks. "
               f"Disks {_ARCHIVE_LOST[0]} and {_ARCHIVE_LOST[1]} failed; the rows of the "
               f"surviving disks {', '.join(str(d + 1) for d in survivors)} form the "
               "decoding submatrix, whose inverse rebuilds the data."),
        field=F,
        subject="decoding submatrix",
        matrices=[("generator matrix (6 disks x 4 data disks)", generator),
                  ("decoding submatrix (surviving disks)", decoding)],
    )
    section.analysis = analyse_matrix(F, decoding)
    inverse = section.analysis["inverse"]
    if not isinstance(inverse, dict):
        section.matrices.append(("decoding matrix (inverse of the submatrix)", inverse))
        section.matrices.append(("bytes read from the surviving disks (one row per disk)",
                                 stripes[survivors]))
        rebuilt = F.matmul(inverse, stripes[survivors])
        rebuilt_bytes = bytes(int(v) for v in rebuilt.reshape(-1))
        section.findings.append(("rebuilt payload", rebuilt_bytes.decode("latin-1")))
        section.findings.append(("rebuilt payload equals the stored one",
                                 "yes" if rebuilt_bytes == _ARCHIVE_PAYLOAD else "NO"))
    return section


# --------------------------------------------------------------------------- report

JOB_SECTIONS = [
    ("erasure", "An invented archive over 14 disks: four fail, the file comes back",
     "gfla.jobs.erasure.demo"),
    ("mds", "An invented lightweight cipher's mixing layer: MDS or not, and a cheaper one",
     "gfla.jobs.mixing.demo"),
    ("keysched", "The invented cipher's key schedule: period, weak keys, a leaked key",
     "gfla.jobs.keysched.demo"),
]


def _register_job_section(name, title, module_name):
    @demo_section(name)
    def build(gfla):
        import importlib

        module = importlib.import_module(module_name)
        data = module.demo_section(False)
        return Section(name=name, title=title, story="", field=None, payload=data,
                       text=module.format_text(data))


for _name, _title, _module in JOB_SECTIONS:
    _register_job_section(_name, _title, _module)


def build_sections(names=None):
    """Run the registered sections (all, in registration order, or those named)."""
    import gfla

    chosen = list(SECTIONS) if not names else [n for n in SECTIONS if n in set(names)]
    return [SECTIONS[name](gfla) for name in chosen]


def _hex_field(F):
    return getattr(F, "modulus", None) is not None


def report_json(sections):
    """The demo as one JSON-ready dict: ``{"demo": [...], "note": ...}``."""
    out = []
    for s in sections:
        if s.payload is not None:
            out.append({"title": s.title, **jsonable(s.payload), "name": s.name})
            continue
        F = s.field
        item = {"name": s.name, "title": s.title, "story": s.story, "field": F.spec,
                "subject": s.subject}
        if getattr(F, "modulus", None) is not None:
            item["modulus"] = int(F.modulus)
        item["matrices"] = [{"label": label, "matrix": jsonable(m)} for label, m in s.matrices]
        item["analysis"] = jsonable(s.analysis)
        item["findings"] = [{"label": label, "value": jsonable(v)} for label, v in s.findings]
        out.append(item)
    return {"demo": out, "note": INVENTED_NOTE}


def _analysis_lines(s):
    F, hex_output = s.field, _hex_field(s.field)
    lines = []
    for key in ("det", "rank", "charpoly", "minpoly", "order", "inverse"):
        if key not in s.analysis:
            continue
        value = s.analysis[key]
        if isinstance(value, dict) and "refused" in value:
            cert = ", ".join(f"{k}={v}" for k, v in value["certificate"].items())
            lines.append(f"  {key}: refused: {value['refused']}" + (f" [{cert}]" if cert else ""))
        elif key == "inverse":
            lines.append("  inverse: exists (verified by gfla: inverse * matrix = I)")
        elif key == "det":
            lines.append(f"  det: {format_element(value, F, hex_output)}")
        elif key in ("charpoly", "minpoly"):
            lines.append(f"  {key}: {format_polynomial(value, F, hex_output)}")
        else:
            lines.append(f"  {key}: {value}")
    return lines


def _wrap(text, width=88, indent=""):
    import textwrap

    return textwrap.fill(text, width=width, initial_indent=indent, subsequent_indent=indent)


def report_text(sections):
    """The demo as a readable text report."""
    blocks = [_wrap(INVENTED_NOTE)]
    for s in sections:
        if s.text is not None:
            head, _, rest = s.text.strip().partition("\n")
            if not head.startswith("=="):
                head = f"== {head} =="
            blocks.append(f"{head}\n{rest.strip()}")
            continue
        F, hex_output = s.field, _hex_field(s.field)
        modulus = f", modulus 0x{int(F.modulus):x}" if getattr(F, "modulus", None) else ""
        lines = [f"== {s.title} ==", f"field: {F.spec}{modulus}", _wrap(s.story)]
        for label, matrix in s.matrices:
            lines.append(f"{label}{' (hex)' if hex_output else ''}:")
            lines.append(format_matrix(matrix, F, hex_output, indent="  "))
        lines.append(f"analysis of the {s.subject}:")
        lines.extend(_analysis_lines(s))
        for label, value in s.findings:
            if isinstance(value, list):
                value = format_vector(value, F, hex_output)
            lines.append(f"{label}: {value}")
        blocks.append("\n".join(lines))
    return "\n\n".join(blocks)
