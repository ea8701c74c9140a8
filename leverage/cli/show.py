"""leverage show RESULT_DIR: print the summary of a finished run."""
from pathlib import Path

from ..errors import NO_VALUE, ProblemError
from ..result import read_json
from ..summary import render


def add_parser(sub):
    p = sub.add_parser("show", help="print the summary of a result folder")
    p.add_argument("results", nargs="+", help="result folder(s)")
    return p


def load_record(folder) -> dict:
    path = Path(folder) / "best.json"
    if not path.is_file():
        raise ProblemError(str(folder), "", NO_VALUE, "no best.json here: not a result folder")
    try:
        return read_json(path)
    except ValueError as exc:
        raise ProblemError(str(path), "", NO_VALUE, f"unreadable JSON ({exc})") from None


def main(args) -> int:
    for folder in args.results:
        record = load_record(folder)
        try:
            text = render(record)
        except (KeyError, TypeError, ValueError, AttributeError) as exc:
            raise ProblemError(str(Path(folder) / "best.json"), "", NO_VALUE,
                               f"not a leverage result record ({type(exc).__name__}: {exc})"
                               ) from None
        print(text)
    return 0
