"""A series of sheets (``strikeline batch``): a TOML job file, one ``run`` per sheet (here, in
local processes or on a dask cluster), reruns that skip unchanged sheets, an index of every sheet
(``index.gpkg``, ``index.html``, ``batch.json``) and the mismatch of neighbouring sheets' surfaces
along their shared edges."""
from strikeline.batch.job import Job, Sheet, read_job
from strikeline.batch.series import BatchResult, run_batch

__all__ = ["BatchResult", "Job", "Sheet", "read_job", "run_batch"]
