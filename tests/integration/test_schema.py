"""sql/schema.sql is the schema the migrations produce.

The binary creates a fresh database (an import of an empty folder runs
every migration), sqlite3's own `.schema` prints it (the reference tool,
not our code), and the statements, put in a fixed order, must equal
sql/schema.sql without its leading comment.

After a new migration, write the file again with:
    MITILOG_BINARY=build/mitilog /usr/bin/python3 tests/integration/test_schema.py --write
"""
import os
import re
import subprocess
import sys
import tempfile

REPO = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
BINARY = os.path.abspath(os.environ.get(
    "MITILOG_BINARY", os.path.join(REPO, "build", "mitilog")))
SCHEMA = os.path.join(REPO, "sql", "schema.sql")

HEADER = """\
-- schema.sql - the database schema that sql/migrations/ produce, as
-- sqlite3's .schema prints it, one statement after another in a fixed
-- order: tables, indexes, views, triggers, each kind by name. Not run by
-- anything: the migrations make the schema; this file shows it whole, and
-- tests/integration/test_schema.py checks that it is what they produce.
-- Written by: MITILOG_BINARY=build/mitilog /usr/bin/python3 tests/integration/test_schema.py --write
"""

KIND_ORDER = {"TABLE": 0, "INDEX": 1, "VIEW": 2, "TRIGGER": 3}
CREATE_RE = re.compile(r'CREATE (?:UNIQUE )?(TABLE|INDEX|VIEW|TRIGGER) '
                       r'(?:IF NOT EXISTS )?"?([A-Za-z_][A-Za-z0-9_]*)"?')


def fresh_schema(binary):
    """The .schema text of a database the binary has just created."""
    with tempfile.TemporaryDirectory() as work:
        empty = os.path.join(work, "empty")
        os.mkdir(empty)
        config = os.path.join(work, "mitilog.ini")
        with open(config, "w") as f:
            f.write("[storage]\ndata_directory = %s\n\n[log]\nlevel = warning\n"
                    % os.path.join(work, "var"))
        imported = subprocess.run([binary, "import", "--config", config, empty],
                                  capture_output=True, text=True, timeout=120)
        assert imported.returncode == 0, imported.stderr
        database = os.path.join(work, "var", "mitilog.sqlite3")
        printed = subprocess.run(["sqlite3", database, ".schema"],
                                 capture_output=True, text=True, timeout=60)
        assert printed.returncode == 0, printed.stderr
        return printed.stdout


def normalised(text):
    """The statements of .schema output (a statement starts with CREATE
    at the start of a line; the column list sqlite3 prints after a view
    stays with it), trailing spaces removed, in a fixed order."""
    statements = []
    for line in text.splitlines():
        line = line.rstrip()
        if line.startswith("CREATE "):
            statements.append([line])
        elif statements:
            statements[-1].append(line)
        elif line:
            raise AssertionError("text before the first CREATE: %r" % line)

    def key(statement):
        match = CREATE_RE.match(statement[0])
        assert match, statement[0]
        return (KIND_ORDER[match.group(1)], match.group(2))

    statements.sort(key=key)
    return "\n".join("\n".join(s).rstrip("\n") for s in statements) + "\n"


def without_header(text):
    lines = text.splitlines(keepends=True)
    while lines and lines[0].startswith("--"):
        lines.pop(0)
    return "".join(lines)


def test_schema_file_is_what_the_migrations_make():
    # reference tool: sqlite3's .schema on a database the binary made
    expected = normalised(fresh_schema(BINARY))
    with open(SCHEMA, encoding="utf-8") as f:
        shown = without_header(f.read())
    assert shown == expected, (
        "sql/schema.sql differs from what the migrations produce; write it again "
        "with tests/integration/test_schema.py --write and review the difference")


def test_no_procedure_views():
    # No INSTEAD OF trigger (logic run by writing to an empty view): the
    # store runs its statements itself. SQL syntax: sqlite.org/lang_createtrigger.html
    with open(SCHEMA, encoding="utf-8") as f:
        schema = f.read()
    assert not re.search(r"\bINSTEAD\s+OF\s+(INSERT|UPDATE|DELETE)\b", schema, re.IGNORECASE)


if __name__ == "__main__":
    if sys.argv[1:] != ["--write"]:
        sys.exit("usage: test_schema.py --write  (writes sql/schema.sql)")
    with open(SCHEMA, "w", encoding="utf-8") as f:
        f.write(HEADER + normalised(fresh_schema(BINARY)))
    print("wrote", SCHEMA)
