# gunicorn configuration for containers: `gunicorn -c deploy/gunicorn.conf.py 'service.serving:asgi_app()'`.
# The values are the same embedded defaults `sluice serve` uses.
import os

from service.serving import gunicorn_defaults

globals().update(
    gunicorn_defaults(
        host=os.environ.get("SLUICE_HOST", "0.0.0.0"),
        port=int(os.environ.get("SLUICE_PORT", "8000")),
        workers=int(os.environ["SLUICE_WORKERS"]) if os.environ.get("SLUICE_WORKERS") else None,
    )
)
