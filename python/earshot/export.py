"""`python3 -m earshot.export ...`: the exporter's command line (same as `python3 -m earshot export`).

Imported as a module, earshot.export stays callable: earshot.export(model, path, ...).
"""

import sys
import types


class _CallableModule(types.ModuleType):
    def __call__(self, *args, **kw):
        from .exporter import export
        return export(*args, **kw)


if __name__ == "__main__":
    from earshot.cli import main
    sys.exit(main(["export"] + sys.argv[1:]))
else:
    sys.modules[__name__].__class__ = _CallableModule
