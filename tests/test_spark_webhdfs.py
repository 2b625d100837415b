"""The spark engine reading over WebHDFS, Hadoop's REST protocol for HDFS, from a small read-only endpoint on
127.0.0.1 written here with the standard library's HTTP server.

The endpoint answers the read operations of Apache Hadoop's WebHDFS REST API ("WebHDFS REST API", Hadoop
docs): GETFILESTATUS, LISTSTATUS, GETFILEBLOCKLOCATIONS and OPEN, OPEN with the namenode's 307 redirect to a
datanode URL (here the same server, under /data/); errors are the documented RemoteException JSON. PySpark's
bundled Hadoop client has the `webhdfs://` file system. This is the WebHDFS protocol over HTTP, not HDFS's own
RPC (`hdfs://`), which needs a real namenode and is not tried here.
"""

from __future__ import annotations

import json
import threading
from collections.abc import Iterator
from contextlib import contextmanager
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from pathlib import Path
from typing import Any
from urllib.parse import parse_qs, quote, unquote, urlsplit

import pytest
from sklearn.metrics import adjusted_rand_score
from tests.helpers import invoke, planted_notes_csv, read_assignments

# a hang on the sockets fails the test (pytest-timeout) instead of waiting on Hadoop's own 60 s socket timeouts,
# retried; a run here takes under a minute, 70 s measured at load 7 with the session's start
pytestmark = [pytest.mark.spark, pytest.mark.timeout(300)]

PREFIX = "/webhdfs/v1"
DATA = "/data"
BLOCK = 128 * 1024 * 1024  # dfs.blocksize's default (hdfs-default.xml)


def _status(path: Path, suffix: str) -> dict[str, Any]:
    """A FileStatus object as the WebHDFS docs list its fields."""
    info = path.stat()
    return {
        "accessTime": int(info.st_atime * 1000), "blockSize": BLOCK if path.is_file() else 0,
        "childrenNum": len(list(path.iterdir())) if path.is_dir() else 0, "fileId": info.st_ino,
        "group": "supergroup", "length": info.st_size if path.is_file() else 0,
        "modificationTime": int(info.st_mtime * 1000), "owner": "pilewise", "pathSuffix": suffix,
        "permission": "755" if path.is_dir() else "644", "replication": 1 if path.is_file() else 0,
        "storagePolicy": 0, "type": "DIRECTORY" if path.is_dir() else "FILE",
    }


class _Handler(BaseHTTPRequestHandler):
    root: Path
    requests: list[str]

    def log_message(self, format: str, *args: Any) -> None:  # noqa: A002 (the stdlib's name)
        pass  # the operations are kept in `requests`, not printed

    def _send(self, code: int, body: bytes, kind: str = "application/json", location: str | None = None) -> None:
        self.send_response(code)
        self.send_header("Content-Type", kind)
        self.send_header("Content-Length", str(len(body)))
        if location:
            self.send_header("Location", location)
        self.end_headers()
        if self.command != "HEAD":
            self.wfile.write(body)

    def _error(self, code: int, exception: str, message: str) -> None:
        body = {"RemoteException": {"exception": exception, "javaClassName": f"java.io.{exception}",
                                    "message": message}}
        self._send(code, json.dumps(body).encode())

    def do_GET(self) -> None:  # noqa: N802 (the stdlib's name)
        url = urlsplit(self.path)
        query = {key.lower(): values[0] for key, values in parse_qs(url.query).items()}
        if url.path.startswith(DATA + "/"):
            self._data(unquote(url.path[len(DATA):]), query)
            return
        if not url.path.startswith(PREFIX):
            self._error(404, "FileNotFoundException", f"not a WebHDFS path: {url.path}")
            return
        name = unquote(url.path[len(PREFIX):]) or "/"
        op = query.get("op", "").upper()
        self.requests.append(f"{op} {name}")
        local = self.root / name.lstrip("/")
        if not local.exists():
            self._error(404, "FileNotFoundException", f"File does not exist: {name}")
        elif op == "GETFILESTATUS":
            self._send(200, json.dumps({"FileStatus": _status(local, "")}).encode())
        elif op == "LISTSTATUS":
            children = sorted(local.iterdir()) if local.is_dir() else [local]
            found = [_status(p, p.name if local.is_dir() else "") for p in children]
            self._send(200, json.dumps({"FileStatuses": {"FileStatus": found}}).encode())
        elif op == "GETFILEBLOCKLOCATIONS":
            size = local.stat().st_size
            host = f"127.0.0.1:{self.server.server_address[1]}"
            block = {"offset": 0, "length": size, "hosts": ["127.0.0.1"], "names": [host],
                     "topologyPaths": [f"/default-rack/{host}"], "cachedHosts": [], "corrupt": False,
                     "storageTypes": ["DISK"]}
            self._send(200, json.dumps({"BlockLocations": {"BlockLocation": [block] if size else []}}).encode())
        elif op == "OPEN":  # the namenode redirects the client to a datanode that holds the bytes
            rest = "&".join(f"{key}={quote(query[key])}" for key in ("offset", "length") if key in query)
            port = self.server.server_address[1]
            self._send(307, b"", location=f"http://127.0.0.1:{port}{DATA}{quote(name)}?{rest}")
        else:
            self._error(400, "UnsupportedOperationException", f"{op} is not served by this read-only endpoint")

    def _data(self, name: str, query: dict[str, str]) -> None:
        self.requests.append(f"DATA {name}")
        local = self.root / name.lstrip("/")
        if not local.is_file():
            self._error(404, "FileNotFoundException", f"File does not exist: {name}")
            return
        raw = local.read_bytes()
        start = int(query.get("offset", "0"))
        end = len(raw) if "length" not in query else start + int(query["length"])
        self._send(200, raw[start:end], kind="application/octet-stream")


@contextmanager
def webhdfs(root: Path) -> Iterator[tuple[int, list[str]]]:
    """Serve ROOT read-only over WebHDFS on 127.0.0.1; yields the port and the list of operations asked for."""
    requests: list[str] = []
    handler = type("Handler", (_Handler,), {"root": root, "requests": requests})
    server = ThreadingHTTPServer(("127.0.0.1", 0), handler)
    server.daemon_threads = True
    thread = threading.Thread(target=server.serve_forever, name="webhdfs-stub", daemon=True)
    thread.start()
    try:
        yield int(server.server_address[1]), requests
    finally:
        server.shutdown()
        server.server_close()
        thread.join(timeout=5)


def test_spark_reads_a_table_over_webhdfs_as_the_local_run_reads_it(
        spark: Any, one_kmeans_start: None, tmp_path: Path) -> None:
    root = tmp_path / "served"
    (root / "in").mkdir(parents=True)
    truth = planted_notes_csv(root / "in" / "notes.csv", per_topic=30, seed=5)
    with webhdfs(root) as (port, asked):
        result = invoke("run", f"webhdfs://127.0.0.1:{port}/in/notes.csv", "--k", "3", "--seed", "0",
                        "--engine", "spark", "--quiet", "--out", str(tmp_path / "spark"))
    assert result.exit_code == 0, result.output
    on_spark = Path(result.output.strip().splitlines()[-1]).parent
    # the bytes came over the protocol: the file's status, then OPEN answered by a redirect that was followed
    assert {"GETFILESTATUS /in/notes.csv", "OPEN /in/notes.csv", "DATA /in/notes.csv"} <= set(asked), asked
    local = invoke("run", str(root / "in" / "notes.csv"), "--k", "3", "--seed", "0", "--quiet",
                   "--out", str(tmp_path / "memory"))
    assert local.exit_code == 0, local.output
    local_rows = {row["doc_id"]: row for row in read_assignments(Path(local.output.strip().splitlines()[-1]).parent)}
    spark_rows = read_assignments(on_spark)
    # nothing lost: every row once, in reading order, as the local reader reads the file from disk
    assert [row["doc_id"] for row in spark_rows] == list(local_rows) == list(truth)
    assert [row["title"] for row in spark_rows] == [row["title"] for row in local_rows.values()]
    labels = [row["cluster"] for row in spark_rows]
    # ARI (Hubert and Arabie 1985, scikit-learn) with the in-memory run and with the planted topics
    assert adjusted_rand_score([local_rows[row["doc_id"]]["cluster"] for row in spark_rows], labels) >= 0.95
    assert adjusted_rand_score([truth[row["doc_id"]] for row in spark_rows], labels) >= 0.95


def test_a_webhdfs_path_that_does_not_exist_is_one_line(spark: Any, tmp_path: Path) -> None:
    (tmp_path / "served").mkdir()
    with webhdfs(tmp_path / "served") as (port, _):
        result = invoke("run", f"webhdfs://127.0.0.1:{port}/in/missing.csv", "--k", "3", "--engine", "spark",
                        "--out", str(tmp_path / "out"))
    assert result.exit_code == 1, result.output
    lines = [line for line in result.stderr.splitlines() if line.startswith("pilewise: error")]
    # Spark's own words for a path that is not there ([PATH_NOT_FOUND], Spark's error classes)
    assert len(lines) == 1 and "Traceback" not in result.output + result.stderr, result.stderr
    assert lines[0].startswith(f"pilewise: error: Spark could not read 'webhdfs://127.0.0.1:{port}/in/missing.csv' "
                               "([PATH_NOT_FOUND] Path does not exist"), lines[0]
