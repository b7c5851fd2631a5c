"""Dependency aliases shared by the routes."""

from __future__ import annotations

from collections.abc import Iterator
from typing import Annotated

from fastapi import Depends, Request
from fastapi.templating import Jinja2Templates
from sqlalchemy.engine import Engine
from sqlmodel import Session

from server.config import Settings
from server.db import session_scope


def get_settings(request: Request) -> Settings:
    return request.app.state.settings


def get_engine(request: Request) -> Engine:
    return request.app.state.engine


def get_session(request: Request) -> Iterator[Session]:
    yield from session_scope(request.app.state.engine)


def get_templates(request: Request) -> Jinja2Templates:
    return request.app.state.templates


SettingsDep = Annotated[Settings, Depends(get_settings)]
EngineDep = Annotated[Engine, Depends(get_engine)]
SessionDep = Annotated[Session, Depends(get_session)]
TemplatesDep = Annotated[Jinja2Templates, Depends(get_templates)]
