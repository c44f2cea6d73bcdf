"""Add or remove an extension through a running LibreOffice (its deployment API).

Run by LibreOffice's Python (the one with pyuno), not by sheetfuncs':
``python3 office_install.py add|remove|list PROFILE_DIR [OXT|IDENTIFIER]``.
It starts ``soffice --headless`` on that user profile, asks the extension
manager, prints one JSON line and ends soffice.  ``unopkg`` refuses to run
for a user profile as root; this route has no such limit.  Standard library
and pyuno only.
"""
import json
import os
import subprocess
import sys
import time
import uuid

import uno
import unohelper
from com.sun.star.task import XInteractionHandler
from com.sun.star.ucb import XCommandEnvironment, XProgressHandler


class _Approve(unohelper.Base, XInteractionHandler):
    def handle(self, request):
        for cont in request.getContinuations():
            name = cont.getImplementationName() if hasattr(cont, "getImplementationName") else ""
            if "Approve" in name or "Approve" in str(cont):
                cont.select()
                return
        conts = request.getContinuations()
        if conts:
            conts[0].select()


class _Progress(unohelper.Base, XProgressHandler):
    def push(self, status):
        pass

    def update(self, status):
        pass

    def pop(self):
        pass


class _Env(unohelper.Base, XCommandEnvironment):
    def getInteractionHandler(self):
        return _Approve()

    def getProgressHandler(self):
        return _Progress()


def _office(profile):
    pipe = "sfinst" + uuid.uuid4().hex[:12]
    soffice = os.environ.get("SOFFICE") or "soffice"
    proc = subprocess.Popen(
        [soffice, "-env:UserInstallation=" + uno.systemPathToFileUrl(os.path.abspath(profile)),
         "--headless", "--invisible", "--norestore", "--nolockcheck", "--nodefault", "--nologo",
         "--accept=pipe,name=%s;urp;StarOffice.ComponentContext" % pipe],
        stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    local = uno.getComponentContext()
    resolver = local.ServiceManager.createInstanceWithContext("com.sun.star.bridge.UnoUrlResolver", local)
    deadline = time.monotonic() + 120
    while True:
        try:
            return proc, resolver.resolve("uno:pipe,name=%s;urp;StarOffice.ComponentContext" % pipe)
        except Exception:
            if time.monotonic() > deadline or proc.poll() is not None:
                proc.kill()
                raise RuntimeError("soffice did not start (exit status %s)" % proc.poll())
            time.sleep(0.3)


def main(argv):
    action, profile = argv[1], argv[2]
    target = argv[3] if len(argv) > 3 else ""
    proc, ctx = _office(profile)
    result = {}
    try:
        em = ctx.getValueByName("/singletons/com.sun.star.deployment.ExtensionManager")
        env = _Env()
        if action == "add":
            pkg = em.addExtension(uno.systemPathToFileUrl(os.path.abspath(target)), (), "user",
                                  em.createAbortChannel(), env)
            result = {"identifier": pkg.getIdentifier().Value if pkg else None}
        elif action in ("remove", "list"):
            found = []
            for pkg in em.getDeployedExtensions("user", em.createAbortChannel(), env):
                if pkg is None:
                    continue
                ident = pkg.getIdentifier().Value
                found.append(ident)
                if action == "remove" and ident == target:
                    em.removeExtension(ident, pkg.getName(), "user", em.createAbortChannel(), env)
            result = {"identifiers": found}
        else:
            raise ValueError("unknown action %r" % action)
    except Exception as exc:
        result = {"error": "%s: %s" % (type(exc).__name__, getattr(exc, "Message", "") or exc)}
    finally:
        try:
            ctx.ServiceManager.createInstanceWithContext("com.sun.star.frame.Desktop", ctx).terminate()
        except Exception:
            pass
        try:
            proc.wait(timeout=30)
        except subprocess.TimeoutExpired:
            proc.kill()
    if action in ("add", "remove") and "error" not in result:
        # LibreOffice takes a changed extension fully into use (its jobs too) only from the
        # start after the one that registered it: make that start now, not in the user's session
        proc, ctx = _office(profile)
        try:
            ctx.ServiceManager.createInstanceWithContext("com.sun.star.frame.Desktop", ctx).terminate()
        except Exception:
            pass
        try:
            proc.wait(timeout=30)
        except subprocess.TimeoutExpired:
            proc.kill()
    sys.stdout.write(json.dumps(result) + "\n")
    return 1 if "error" in result else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
