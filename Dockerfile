# One image for the web server, the worker and the timer (docker-compose.yml
# picks the command). Written for Docker; not built on the project machine,
# which has no Docker engine.
FROM python:3.11-slim

ENV PYTHONDONTWRITEBYTECODE=1 \
    PYTHONUNBUFFERED=1 \
    SITEPACE_VAR_DIR=/var/lib/sitepace

RUN useradd --system --create-home --home-dir /home/sitepace sitepace \
    && mkdir -p /var/lib/sitepace && chown sitepace /var/lib/sitepace

WORKDIR /app
COPY pyproject.toml README.md ./
COPY api ./api
COPY scheduling ./scheduling
COPY frontend ./frontend
COPY seed_data ./seed_data
COPY manage.py ./
RUN pip install --no-cache-dir .

USER sitepace
EXPOSE 8000
CMD ["gunicorn", "api.wsgi:application", "--bind", "0.0.0.0:8000", "--workers", "3", "--timeout", "60"]
