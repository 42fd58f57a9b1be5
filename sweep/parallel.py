"""Run analysis blocks in local processes or on a Dask cluster; results come back in block
order, so they equal a serial run exactly."""
from __future__ import annotations

from .analysis import analyse_block
from .errors import InputError


def _run(args):
    study, opt, a, b = args
    return analyse_block(study, a, b, opt)


def process_mapper(workers: int):
    """Spread blocks over `workers` local processes."""
    def mapper(study, opt, blocks):
        from concurrent.futures import ProcessPoolExecutor
        with ProcessPoolExecutor(workers) as ex:
            yield from ex.map(_run, [(study, opt, a, b) for a, b in blocks])
    return mapper


def dask_mapper(address: str):
    """Send blocks to the Dask scheduler at `address` (dask.distributed)."""
    try:
        from distributed import Client
    except ImportError:
        raise InputError("", "--scheduler", "needs dask.distributed: pip install 'timer-sweep[cluster]'") from None

    def mapper(study, opt, blocks):
        try:
            client = Client(address, timeout="10s")
        except (OSError, TimeoutError) as e:
            raise InputError("", "--scheduler", f"cannot reach a Dask scheduler at {address}: {e}") from None
        try:
            st = client.scatter(study, broadcast=True)
            futures = [client.submit(analyse_block, st, a, b, opt, pure=False) for a, b in blocks]
            for f in futures:
                yield f.result()
        finally:
            client.close()
    return mapper
