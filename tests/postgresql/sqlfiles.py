"""What the PostgreSQL dialect tests share: the query files as each engine
reads them, SQLite-style parameters rewritten to PostgreSQL's $N, a copy of
an SQLite database into PostgreSQL, and the comparison of two results.

The rewrite follows the engine seam's rule (parameters ?N and :name become
$N; string literals, quoted names and comments are left alone), so that a
statement runs here as the PostgreSQL engine runs it.
"""
import json
import math
import os
import re

REPO = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
SQL = os.path.join(REPO, "sql")


def query_text(name, engine):
    """The text of queries/<subject>/NAME.sql for engine: PostgreSQL's
    override (queries/<subject>/postgresql/NAME.sql) when there is one."""
    subject, file_name = os.path.split(name)
    if engine == "postgresql":
        override = os.path.join(SQL, subject, "postgresql", file_name)
        if os.path.exists(override):
            with open(override, encoding="utf-8") as f:
                return f.read()
    with open(os.path.join(SQL, name), encoding="utf-8") as f:
        return f.read()


def has_override(name):
    subject, file_name = os.path.split(name)
    return os.path.exists(os.path.join(SQL, subject, "postgresql", file_name))


_TOKEN = re.compile(r"""
    (?P<string>'(?:[^']|'')*')
  | (?P<quoted>"(?:[^"]|"")*")
  | (?P<line>--[^\n]*)
  | (?P<block>/\*.*?\*/)
  | (?P<cast>::)
  | (?P<numbered>\?[0-9]+)
  | (?P<named>[:@$][A-Za-z_][A-Za-z0-9_]*)
""", re.VERBOSE | re.DOTALL)


def postgresql_parameters(sql):
    """(text with $N, {name: N}) numbered as SQLite numbers them
    (lang_expr.html, "Parameters"): ?N is N; a name keeps the number it
    had, else takes the largest number so far plus one."""
    names = {}
    largest = 0

    def replace(match):
        nonlocal largest
        if match.group("numbered"):
            number = int(match.group("numbered")[1:])
            largest = max(largest, number)
            return "$%d" % number
        if match.group("named"):
            name = match.group("named")[1:]
            if name not in names:
                largest += 1
                names[name] = largest
            return "$%d" % names[name]
        return match.group(0)

    return _TOKEN.sub(replace, sql), names


def bind(names, parameters):
    """Parameters as the positional list of the rewritten text: a list is
    ?1, ?2...; a dict holds names and numbers as text ("1": ?1)."""
    if isinstance(parameters, dict):
        count = max(list(names.values()) + [int(k) for k in parameters if k.isdigit()] + [0])
        values = [None] * count
        for key, value in parameters.items():
            if key.isdigit():
                values[int(key) - 1] = value
        for name, number in names.items():
            values[number - 1] = parameters.get(name)
        return values
    return list(parameters)


def sqlite_bind(parameters):
    if isinstance(parameters, dict):
        return {k: v for k, v in parameters.items()}
    return {str(i + 1): v for i, v in enumerate(parameters)}


def statements(sql):
    """The statements of a file, each complete (sqlite3.complete_statement)."""
    import sqlite3
    found, current = [], ""
    for line in sql.splitlines(keepends=True):
        current += line
        if sqlite3.complete_statement(current):
            if current.strip() and not all(
                    l.strip().startswith("--") or not l.strip() for l in current.splitlines()):
                found.append(current.strip())
            current = ""
    if current.strip() and not all(
            l.strip().startswith("--") or not l.strip() for l in current.splitlines()):
        found.append(current.strip())
    return found


def run_sqlite(connection, sql, parameters):
    """Rows of the last statement of the file (a file of several
    statements runs them in order, as store_exec_file does)."""
    rows = []
    for statement in statements(sql):
        # sqlite3's named style reads ?NNN as numbered too.
        cursor = connection.execute(statement, sqlite_bind(parameters) if parameters else ())
        rows = [tuple(row) for row in cursor.fetchall()]
    return rows


def run_postgresql(connection, sql, parameters):
    rows = None
    for statement in statements(sql):
        rows = _run_postgresql(connection, statement, parameters)
    return rows


def _run_postgresql(connection, sql, parameters):
    """Runs like the engine: every parameter sent as text with no declared
    type (PQexecParams with types 0), so that the server infers each type
    from its use in the statement. Returns the rows, or None for a
    statement without result."""
    text, names = postgresql_parameters(sql)
    values = bind(names, parameters)
    cursor = connection.cursor()
    # psycopg2 interpolates on the client; the server-side inference of
    # untyped parameters is what the engine gets, so a PREPARE with unknown
    # types and an EXECUTE with literal text values reproduces it.
    count = max([int(n) for n in re.findall(r"\$([0-9]+)", text)] + [0])
    values = (values + [None] * count)[:count]
    statement = "mitilog_compare_statement"
    cursor.execute("DEALLOCATE ALL")
    cursor.execute("PREPARE %s AS %s" % (statement, text.strip().rstrip(";")))
    if count:
        literals = ", ".join("NULL" if v is None else "%s" for v in values)
        arguments = [_text_value(v) for v in values if v is not None]
        cursor.execute("EXECUTE %s (%s)" % (statement, literals), arguments)
    else:
        cursor.execute("EXECUTE %s" % statement)
    rows = cursor.fetchall() if cursor.description is not None else None
    cursor.execute("DEALLOCATE %s" % statement)
    return rows


def _text_value(value):
    if isinstance(value, (bytes, bytearray, memoryview)):
        import psycopg2
        return psycopg2.Binary(bytes(value))
    if isinstance(value, float):
        return repr(value)
    return str(value)


# --- comparison -----------------------------------------------------------

# Members holding the clock of the run ('now'), which two engines asked one
# after the other may read in different seconds.
CLOCK_KEYS = {"generated_at"}


def _number(value):
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def normalise(value):
    """A value of either engine as a comparable Python value: JSON text
    parsed, decimals as floats, booleans as 0/1, memoryviews as bytes."""
    import decimal
    if isinstance(value, decimal.Decimal):
        return int(value) if value == value.to_integral_value() and "." not in str(value) \
            else float(value)
    if isinstance(value, bool):
        return int(value)
    if isinstance(value, memoryview):
        return bytes(value)
    if isinstance(value, str) and value[:1] in ("[", "{"):
        try:
            return json.loads(value)
        except ValueError:
            return value
    return value


def same(a, b, path="$"):
    """None when a and b are the same document, else where they differ.
    Numbers are equal when they print the same with 15 significant digits
    (SQLite's JSON writes reals with 15, docs/postgresql-dialect.md); an
    integer must stay an integer; object keys must come in the same order."""
    if isinstance(a, bool) or isinstance(b, bool):
        # JSON true is not 1 (a row's column is made 0/1 by normalise)
        return None if type(a) is type(b) and a == b else "%s: %r != %r" % (path, a, b)
    if _number(a) and _number(b):
        if isinstance(a, int) and isinstance(b, int):
            return None if a == b else "%s: %r != %r" % (path, a, b)
        if isinstance(a, float) and isinstance(b, float) or a == b:
            if a == b or ("%.15g" % a) == ("%.15g" % b) or (
                    math.isclose(a, b, rel_tol=5e-15, abs_tol=0)):
                return None
            return "%s: %r != %r" % (path, a, b)
        # one int, one float: equal values are the same JSON number
        return None if float(a) == float(b) else "%s: %r != %r" % (path, a, b)
    if isinstance(a, dict) and isinstance(b, dict):
        if list(a.keys()) != list(b.keys()):
            return "%s: keys %s != %s" % (path, list(a.keys()), list(b.keys()))
        for key in a:
            if key in CLOCK_KEYS and isinstance(a[key], str) and isinstance(b[key], str) \
                    and len(a[key]) == len(b[key]):
                continue  # the time of the run: same shape, not the same second
            difference = same(a[key], b[key], "%s.%s" % (path, key))
            if difference:
                return difference
        return None
    if isinstance(a, (list, tuple)) and isinstance(b, (list, tuple)):
        if len(a) != len(b):
            return "%s: %d elements != %d" % (path, len(a), len(b))
        for i, (x, y) in enumerate(zip(a, b)):
            difference = same(x, y, "%s[%d]" % (path, i))
            if difference:
                return difference
        return None
    return None if a == b else "%s: %r != %r" % (path, _short(a), _short(b))


def _short(value):
    text = repr(value)
    return text if len(text) < 200 else text[:200] + "..."


def same_rows(sqlite_rows, postgresql_rows):
    a = [[normalise(v) for v in row] for row in sqlite_rows]
    b = [[normalise(v) for v in row] for row in postgresql_rows]
    return same(a, b, "rows")


# --- copy -----------------------------------------------------------------

def copy_database(sqlite_connection, postgresql_connection, tables=None):
    """Copies every row of the SQLite tables into the PostgreSQL tables of
    the same names (empty, with the PostgreSQL schema), parents before
    children, and moves each identity column's sequence past the copied
    ids. Returns {table: rows}."""
    from psycopg2.extras import execute_values
    cursor = postgresql_connection.cursor()
    cursor.execute("SELECT table_name FROM information_schema.tables "
                   "WHERE table_schema = current_schema() AND table_type = 'BASE TABLE'")
    target = {row[0] for row in cursor.fetchall()}
    names = [row[0] for row in sqlite_connection.execute(
        "SELECT name FROM sqlite_schema WHERE type = 'table' AND name NOT LIKE 'sqlite_%'")]
    names = [n for n in names if n in target and (tables is None or n in tables)]
    order = _parents_first(sqlite_connection, names)
    counts = {}
    # The baseline fills its vocabulary (mode names, the ladder): the copy
    # takes SQLite's instead.
    cursor.execute("TRUNCATE %s CASCADE" % ", ".join('"%s"' % t for t in order))
    # Triggers off while copying: rows arrive as SQLite holds them, the
    # day counts of data_days (migration 018) included, not counted again.
    cursor.execute("SET session_replication_role = replica")
    for table in order:
        cursor.execute("SELECT column_name FROM information_schema.columns "
                       "WHERE table_schema = current_schema() AND table_name = %s", (table,))
        postgresql_columns = {row[0] for row in cursor.fetchall()}
        columns = [row[1] for row in sqlite_connection.execute(
            "SELECT * FROM pragma_table_info(?)", (table,))
                   if row[1] in postgresql_columns]
        selected = ['t."%s"' % c for c in columns]
        join = ""
        if "first_received_at" in postgresql_columns and "first_received_at" not in columns \
                and "instance_id" in columns:
            # PostgreSQL's partitioned children carry their instance's
            # first receipt (the partition key).
            columns.append("first_received_at")
            selected.append("i.first_received_at")
            join = " JOIN instances i ON i.id = t.instance_id"
        quoted = ", ".join('"%s"' % c for c in columns)
        rows = sqlite_connection.execute(
            "SELECT %s FROM \"%s\" t%s%s" % (", ".join(selected), table, join,
                                           " ORDER BY t.rowid"
                                           if _has_rowid(sqlite_connection, table) else "")
        ).fetchall()
        import psycopg2
        rows = [tuple(psycopg2.Binary(v) if isinstance(v, bytes) else v for v in row)
                for row in rows]
        if rows:
            execute_values(cursor, "INSERT INTO \"%s\" (%s) OVERRIDING SYSTEM VALUE VALUES %%s"
                           % (table, quoted), rows, page_size=500)
        counts[table] = len(rows)
        cursor.execute("SELECT column_name FROM information_schema.columns "
                       "WHERE table_schema = current_schema() AND table_name = %s "
                       "AND is_identity = 'YES'", (table,))
        for (column,) in cursor.fetchall():
            cursor.execute("SELECT setval(pg_get_serial_sequence(%s, %s), "
                           "coalesce((SELECT max(\"%s\") FROM \"%s\"), 0) + 1, false)"
                           % ("%s", "%s", column, table), (table, column))
    cursor.execute("SET session_replication_role = DEFAULT")
    if "instance_keys" in target:
        # PostgreSQL keeps one row per SOP Instance UID across the month
        # partitions in instance_keys (012_baseline.sql).
        cursor.execute("INSERT INTO instance_keys (sop_instance_uid, id, first_received_at) "
                       "SELECT sop_instance_uid, id, first_received_at FROM instances")
    for sequence, table in (("instances_id_seq", "instances"), ("sr_values_id_seq", "sr_values")):
        cursor.execute("SELECT to_regclass(%s)", (sequence,))
        if cursor.fetchone()[0] is not None:
            cursor.execute("SELECT setval(%%s, coalesce((SELECT max(id) FROM %s), 0) + 1, false)"
                           % table, (sequence,))
    if "schema_version" in target:
        version = sqlite_connection.execute("PRAGMA user_version").fetchone()[0]
        cursor.execute("INSERT INTO schema_version (only_row, version) VALUES (1, %s) "
                       "ON CONFLICT (only_row) DO UPDATE SET version = excluded.version",
                       (version,))
    postgresql_connection.commit()
    return counts


def _has_rowid(connection, table):
    sql = connection.execute("SELECT sql FROM sqlite_schema WHERE name = ?", (table,)).fetchone()[0]
    return "WITHOUT ROWID" not in sql.upper()


def _parents_first(connection, names):
    parents = {n: {row[2] for row in connection.execute(
        "SELECT * FROM pragma_foreign_key_list(?)", (n,))} & set(names) - {n}
        for n in names}
    order = []
    while len(order) < len(names):
        for n in names:
            if n not in order and parents[n] <= set(order):
                order.append(n)
    return order
