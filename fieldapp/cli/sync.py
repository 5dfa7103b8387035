"""``fieldapp sync`` (a device and its office) and ``fieldapp office`` (the office's side).

    fieldapp sync https://office.example:8443 --code K7QM-4TXZ --name "Tablet 2" --person "Scout A"
    fieldapp sync                     # later: the office's address is remembered
    fieldapp sync --follow "Block 3"  # and bring back what colleagues recorded there
    fieldapp office code              # at the office: a pairing code for devices
    fieldapp office devices [--revoke ID]
"""
from __future__ import annotations

import json
import sys

import click

from . import cli
from .common import data_option, open_log


def _keep_settings(conn, ca_file, name, person, follow, unfollow) -> str | None:
    """What the command line changes on this device before it pairs or syncs
    (the office's CA file, the names, the followed sites); returns the CA file."""
    from .. import store
    s = store.sync
    if ca_file:
        store.set_setting(conn, s.OFFICE_CA_FILE, str(click.format_filename(ca_file)))
    if name is not None:
        store.set_setting(conn, s.DEVICE_NAME, store.clean_person(name) or None)
    if person is not None:
        store.set_setting(conn, s.PERSON, store.clean_person(person) or None)
    for site in follow:
        click.echo(f"Following {store.follow_site(conn, site)}.", err=True)
    for site in unfollow:
        if not store.unfollow_site(conn, site):
            click.echo(f"Not following {site!r}; nothing changed.", err=True)
    return store.get_setting(conn, s.OFFICE_CA_FILE)


@cli.command("sync")
@click.argument("url", required=False)
@click.option("--code", help="the pairing code the office shows (pairs this device first)")
@click.option("--name", help="this device's name at the office, e.g. 'Tablet 2'")
@click.option("--person", help="who takes the readings on this device, e.g. 'Scout A'")
@click.option("--ca-file", type=click.Path(exists=True, dir_okay=False),
              help="the office's own CA certificate (PEM or DER), when it is not one the "
                   "system trusts")
@click.option("--follow", multiple=True, metavar="SITE",
              help="also bring back this site's readings from the office (repeatable)")
@click.option("--unfollow", multiple=True, metavar="SITE", help="stop bringing this site back")
@click.option("--no-sync", is_flag=True, help="only pair or change settings; send nothing")
@click.option("--json", "as_json", is_flag=True, help="print the outcome as JSON")
@data_option
def sync_cmd(url, code, name, person, ca_file, follow, unfollow, no_sync, as_json, data):
    """Send this log to the office and bring back the sites it follows.

    Only what the office lacks is sent, in batches the office keeps whole or
    not at all; a sync cut off halfway carries on the next time. The token
    goes only over https (or plain http to this machine itself)."""
    from .. import store
    from .. import sync as syncmod
    with open_log(data) as conn:
        s = store.sync
        ca = _keep_settings(conn, ca_file, name, person, follow, unfollow)
        known = store.get_setting(conn, s.OFFICE_URL)
        target = url or known
        if code:
            if not target:
                raise syncmod.SyncError("Give the office's address to pair with it.",
                                        bad_input=True)
            t = syncmod.HttpTransport(target, ca_file=ca)
            try:
                syncmod.pair(conn, t, code, name or store.get_setting(conn, s.DEVICE_NAME) or "",
                             person or store.get_setting(conn, s.PERSON) or "")
            finally:
                t.close()
            click.echo(f"Paired with {t.base}.", err=True)
        elif url and known and syncmod.check_office_url(url) != known:
            raise syncmod.SyncError(f"This device is paired with {known}; to pair with {url}, "
                                    "give the code it shows (--code).", bad_input=True)
        if no_sync:
            return 0
        if not target:
            raise syncmod.SyncError("This device is not paired with an office yet: run "
                                    "fieldapp sync URL --code CODE with the code the office "
                                    "shows.", bad_input=True)
        t = syncmod.HttpTransport(target, ca_file=ca)

        live = not as_json and sys.stderr.isatty()

        def show(p):            # a line redrawn on a terminal; nothing in a pipe or a log
            if live:
                click.echo(f"\r{p['stage']}: sent {p['readings_sent']} in {p['batches_sent']} "
                           f"batch(es), received {p['readings_received']}   ", nl=False, err=True)
        try:
            result = syncmod.sync(conn, t, progress=syncmod.Progress(show))
        finally:
            t.close()
            if live:
                click.echo("", err=True)
    if as_json:
        click.echo(json.dumps(result, indent=2))
    else:
        click.echo(syncmod.describe(result))
    return 0


@cli.group()
def office():
    """The office's side of sync: pairing codes and paired devices."""


@office.command("code")
@data_option
def office_code(data):
    """Make a pairing code for devices (the previous one stops working)."""
    from ..web.pairing import format_code, new_code
    with open_log(data) as conn:
        code = new_code(conn)
    click.echo(f"{format_code(code['code'])}   (valid until "
               f"{code['expires_at'][:16].replace('T', ' ')} UTC)")
    return 0


@office.command("devices")
@click.option("--revoke", type=int, metavar="ID", help="unpair this device")
@click.option("--json", "as_json", is_flag=True)
@data_option
def office_devices(revoke, as_json, data):
    """The devices paired for sync, with their last-seen time."""
    from .. import store
    with open_log(data) as conn:
        if revoke is not None:
            if not store.revoke_office_device(conn, revoke):
                raise store.StoreError(f"No paired device {revoke} (or it was unpaired "
                                       "already).", "revoke", 404)
            click.echo(f"Device {revoke} unpaired; its token no longer syncs.", err=True)
        devices = store.list_office_devices(conn)
    if as_json:
        click.echo(json.dumps([{k: d[k] for k in d if k != "token_sha256"} for d in devices],
                              indent=2))
        return 0
    for d in devices:
        state = f"unpaired {d['revoked_at'][:16]}" if d["revoked_at"] else "paired"
        click.echo(f"{d['id']:>4}  {d['name'] or '-':<20} {d['person'] or '-':<16} "
                   f"{d['readings_in']:>7} readings  last seen {d['last_seen_at'][:16]}  {state}")
    return 0
