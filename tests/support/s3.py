"""An S3-compatible server on loopback (moto's) for the object-storage tests, and what its
buckets hold."""

from __future__ import annotations

import logging
from collections.abc import Iterator
from contextlib import contextmanager

import boto3
import pytest
from moto.server import ThreadedMotoServer


@contextmanager
def s3_server(secret: str, **more: str) -> Iterator[str]:
    """Start the server and point the standard AWS variables at it (plus ``more`` variables)
    until the block ends; yields its endpoint URL. Entered in a module-scoped fixture before
    the module's Dask cluster starts, the cluster's worker processes inherit the variables."""
    logging.getLogger("werkzeug").setLevel(logging.ERROR)  # one line per request otherwise
    server = ThreadedMotoServer(ip_address="127.0.0.1", port=0, verbose=False)
    server.start()
    try:
        host, port = server.get_host_and_port()
        endpoint = f"http://{host}:{port}"
        with pytest.MonkeyPatch.context() as mp:
            for name, value in {"AWS_ENDPOINT_URL": endpoint, "AWS_ACCESS_KEY_ID": "testing",
                                "AWS_SECRET_ACCESS_KEY": secret,
                                "AWS_DEFAULT_REGION": "us-east-1", **more}.items():
                mp.setenv(name, value)
            yield endpoint
    finally:
        server.stop()


def keys(bucket: str, prefix: str = "archive/") -> list[str]:
    """Every object under ``prefix`` (directory markers left out), relative to it."""
    found = boto3.client("s3").list_objects_v2(Bucket=bucket, Prefix=prefix)
    return sorted(o["Key"][len(prefix):] for o in found.get("Contents", [])
                  if not o["Key"].endswith("/"))


def finals(bucket: str) -> list[str]:
    """The archive's objects under their final names (``cycle=…/…``)."""
    return [k for k in keys(bucket) if k.startswith("cycle=")]
