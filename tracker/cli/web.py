"""Commands for the web interface: `tracker user ...` (accounts) and `tracker serve`.

Thin: parse, call :mod:`tracker.services.accounts`, render.  Starlette and uvicorn are
imported only inside `serve`, so `tracker --help` stays light.
"""

from __future__ import annotations

from typing import Annotated

import typer

from tracker.cli.common import DbOption, JsonOption, SettingsOption, UserOption, open_store, print_json, print_table
from tracker.lazy import lazy_module
from tracker.store.database import reading, writing

audit = lazy_module("tracker.store.audit")

ROLE_HELP = "nurse, cardiologist, counsellor or admin"

user_app = typer.Typer(
    name="user",
    no_args_is_help=True,
    help="Accounts of the web interface: add, disable, reset a password, list.\n\n"
    "Example: tracker user add a.nurse --role nurse",
)

HostOption = Annotated[str, typer.Option("--host", help="Address to listen on (default: this computer only).")]
PortOption = Annotated[int, typer.Option("--port", min=1, max=65535, help="TCP port.")]


@user_app.command("add")
def user_add(
    name: Annotated[str, typer.Argument(help="Account name: lower-case letters, digits, '.', '_' or '-'.")],
    role: Annotated[str, typer.Option("--role", help=f"The account's role: {ROLE_HELP}.")],
    user: UserOption = None,
    db: DbOption = None,
    json_out: JsonOption = False,
) -> None:
    """Add an account and print its one-time password, once (it must be changed at the first sign-in).

    Example: tracker user add a.nurse --role nurse
    """
    from tracker.services import accounts as AC

    engine = open_store(db)
    with writing(engine) as conn:
        password = AC.add_account(conn, name, role, by=audit.actor(user))
    _print_password(name.strip(), password, json_out, role=role)


@user_app.command("disable")
def user_disable(
    name: Annotated[str, typer.Argument(help="Account name.")],
    user: UserOption = None,
    db: DbOption = None,
    json_out: JsonOption = False,
) -> None:
    """Disable an account (it is kept, with its history) and end its open sessions.

    Example: tracker user disable a.nurse
    """
    from tracker.services import accounts as AC

    engine = open_store(db)
    with writing(engine) as conn:
        AC.disable_account(conn, name.strip(), by=audit.actor(user))
    if json_out:
        print_json({"name": name.strip(), "disabled": True})
    else:
        typer.echo(f"account {name.strip()} disabled; its sessions have ended")


@user_app.command("reset-password")
def user_reset(
    name: Annotated[str, typer.Argument(help="Account name.")],
    user: UserOption = None,
    db: DbOption = None,
    json_out: JsonOption = False,
) -> None:
    """Give an account a new one-time password, printed once; its open sessions end.

    Example: tracker user reset-password a.nurse
    """
    from tracker.services import accounts as AC

    engine = open_store(db)
    with writing(engine) as conn:
        password = AC.reset_password(conn, name.strip(), by=audit.actor(user))
    _print_password(name.strip(), password, json_out)


@user_app.command("list")
def user_list(db: DbOption = None, json_out: JsonOption = False) -> None:
    """List the accounts: name, role, disabled, whether a new password is due, open sessions.

    Example: tracker user list --json
    """
    from tracker.services import accounts as AC

    engine = open_store(db)
    with reading(engine) as conn:
        rows = AC.list_accounts(conn)
    if json_out:
        print_json({"accounts": rows})
        return
    if not rows:
        typer.echo("no accounts: add one with `tracker user add NAME --role ROLE`")
        return
    print_table("Accounts", ["name", "role", "disabled", "must change password", "failed sign-ins", "open sessions",
                             "created (UTC)", "by"],
                [[r["name"], r["role"], "yes" if r["disabled"] else "", "yes" if r["must_change_password"] else "",
                  r["failed_sign_ins"], r["open_sessions"], r["created_at"], r["created_by"]] for r in rows])  # fmt: skip


def _print_password(name: str, password: str, json_out: bool, role: str | None = None) -> None:
    if json_out:
        data = {"name": name, "one_time_password": password}
        if role:
            data["role"] = role
        print_json(data)
        return
    typer.echo(f"account {name}" + (f" ({role})" if role else "") + f": one-time password {password}")
    typer.echo("It is shown only now. Give it to the account holder, who chooses their own at the first sign-in.")


def serve(
    host: HostOption = "127.0.0.1",
    port: PortOption = 8000,
    settings: SettingsOption = None,
    db: DbOption = None,
) -> None:
    """Serve the web interface (for a network, put it behind a TLS reverse proxy: docs/operations.md).

    Sessions end after the settings' [web] idle_minutes (default 30) without use and
    absolute_hours (default 12) after sign-in.

    Example: tracker serve --db clinic.sqlite --port 8000
    """
    run_server(db, settings, host, port)


def run_server(db, settings, host: str, port: int) -> None:
    import uvicorn

    from tracker.settings import load_settings
    from tracker.web.app import create_app

    conf = load_settings(settings)
    app = create_app(db, settings, idle_minutes=conf.web.idle_minutes, absolute_hours=conf.web.absolute_hours,
                     secure_cookies=conf.web.secure_cookies)  # fmt: skip
    typer.echo(f"serving on http://{host}:{port}/ (stop with Ctrl-C)")
    uvicorn.run(app, host=host, port=port, log_level="warning", proxy_headers=False, server_header=False)


def register(app: typer.Typer) -> None:
    """Add this module's commands to the app."""
    app.add_typer(user_app, name="user")
    app.command("serve")(serve)
