"""A PostgreSQL server for the dialect tests: the one named by
MITILOG_TEST_POSTGRESQL (a libpq connection string), else a throw-away
cluster of tests/postgresql/cluster.sh on a free port, stopped at the end.
Each test gets its own schema, dropped afterwards."""
import os
import shutil
import socket
import subprocess
import tempfile
import uuid

import pytest

HERE = os.path.dirname(os.path.abspath(__file__))


def _free_port():
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.fixture(scope="session")
def postgresql_conninfo():
    given = os.environ.get("MITILOG_TEST_POSTGRESQL")
    if given:
        yield given
        return
    folder = tempfile.mkdtemp(prefix="mitilog-pg-")
    os.chmod(folder, 0o755)  # cluster.sh runs the server as postgres when started by root
    try:
        started = subprocess.run(["bash", os.path.join(HERE, "cluster.sh"), "start",
                                  os.path.join(folder, "cluster"), str(_free_port()), "fast"],
                                 capture_output=True, text=True, check=True)
        yield started.stdout.strip().splitlines()[-1]
    finally:
        subprocess.run(["bash", os.path.join(HERE, "cluster.sh"), "stop",
                        os.path.join(folder, "cluster")], capture_output=True)
        shutil.rmtree(folder, ignore_errors=True)


@pytest.fixture
def postgresql(postgresql_conninfo):
    """A connection whose search_path is a new, empty schema."""
    import psycopg2
    connection = psycopg2.connect(postgresql_conninfo)
    connection.autocommit = True
    schema = "test_%s" % uuid.uuid4().hex[:12]
    cursor = connection.cursor()
    cursor.execute("CREATE SCHEMA %s" % schema)
    cursor.execute("SET search_path = %s" % schema)
    cursor.execute("SET TimeZone = 'UTC'")
    try:
        yield connection
    finally:
        cursor = connection.cursor()
        cursor.execute("DROP SCHEMA %s CASCADE" % schema)
        connection.close()
