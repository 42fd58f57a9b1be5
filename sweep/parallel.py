"""Run analysis blocks in local processes or on a Dask cluster; results come back in block
order, so they equal a serial run exactly."""
from __future__ import annotations

from .errors import InputError


def _run(args):
    fn, study, opt, job = args
    return fn(study, *job, opt) if isinstance(job, tuple) else fn(study, job, opt)


def process_mapper(workers: int):
    """Spread blocks over `workers` local processes."""
    def mapper(fn, study, opt, jobs):
        from concurrent.futures import ProcessPoolExecutor
        with ProcessPoolExecutor(workers) as ex:
            yield from ex.map(_run, [(fn, study, opt, job) for job in jobs])
    return mapper


def dask_mapper(address: str):
    """Send blocks to the Dask scheduler at `address` (dask.distributed)."""
    try:
        from distributed import Client
    except ImportError:
        raise InputError("", "--scheduler", "needs dask.distributed: pip install 'timer-sweep[cluster]'") from None

    def mapper(fn, study, opt, jobs):
        try:
            client = Client(address, timeout="5s")
        except (OSError, TimeoutError) as e:
            raise InputError("", "--scheduler", f"cannot reach a Dask scheduler at {address}: {e}") from None
        try:
            st = client.scatter(study, broadcast=True)
            futures = [client.submit(_run, (fn, st, opt, job), pure=False) for job in jobs]
            for f in futures:
                yield f.result()
        finally:
            client.close()
    return mapper
