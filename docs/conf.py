"""Sphinx configuration for the mwkin documentation (built by ``make docs``).

Offline by design: no intersphinx, no remote images or scripts, the default theme. The API pages are
generated at build time from the public names (``mwkin.SolarFrame``, ``mwkin.widgets.OrbitExplorer``,
...), never from internal module paths, and the example notebooks are copied from
``../example_notebooks`` into the git-ignored ``notebooks/`` folder and executed there.
"""

from __future__ import annotations

import filecmp
import inspect
import os
import pathlib
import re
import shutil
import sys

from sphinx.util import logging

DOCS = pathlib.Path(__file__).resolve().parent
ROOT = DOCS.parent
sys.path.insert(0, str(ROOT))  # document this checkout even without an editable install

import mwkin

# -- Project -----------------------------------------------------------------------------------------

project = "mwkin"
author = "the mwkin developers"
copyright = "the mwkin developers, BSD-3-Clause"
release = mwkin.__version__
version = ".".join(release.split(".")[:2])

extensions = [
    "sphinx.ext.autodoc",
    "sphinx.ext.autosummary",
    "numpydoc",
    "myst_nb",
]

root_doc = "index"
templates_path = ["_templates"]
exclude_patterns = ["_build", "notebooks/output", "**.ipynb_checkpoints"]
source_suffix = {".rst": "restructuredtext", ".md": "myst-nb", ".ipynb": "myst-nb"}

html_theme = "alabaster"
html_title = f"mwkin {release}"
html_theme_options = {
    "description": "Milky Way kinematics from astrometric surveys",
    "fixed_sidebar": True,
    "page_width": "1100px",
    "sidebar_width": "240px",
}
html_sidebars = {"**": ["about.html", "navigation.html", "relations.html", "searchbox.html"]}
html_static_path = ["_static"]
html_show_sourcelink = False
# No CDN: mwkin's docstrings write no math, and the notebooks use none, so MathJax is never asked for.

# -- API reference -----------------------------------------------------------------------------------

# Stubs go to api/generated/ (git-ignored), one page per public name, always rewritten.
autosummary_generate = True
autosummary_generate_overwrite = True
autosummary_imported_members = True
autodoc_member_order = "bysource"
autodoc_typehints = "none"  # the numpydoc Parameters sections carry the types and units

numpydoc_show_class_members = False  # the class template lists methods and attributes itself
numpydoc_class_members_toctree = False
numpydoc_attributes_as_param_list = True

# Docstrings still name a few internal paths (mwkin.catalog.read_catalog, ...), which are moving into
# subpackages. Such a reference is sent to the public page of the same name when there is one.
PUBLIC_NAMESPACES = ("mwkin", "mwkin.widgets", "mwkin.demo", "mwkin.scale")


def _public_reference(app, env, node, contnode):
    if node.get("refdomain") != "py":
        return None
    target = node.get("reftarget", "")
    if not target.startswith("mwkin."):
        return None
    domain = env.get_domain("py")
    parts = target.split(".")
    for start in range(1, len(parts)):
        tail = ".".join(parts[start:])
        for space in PUBLIC_NAMESPACES:
            candidate = f"{space}.{tail}"
            if candidate == target or candidate not in domain.objects:
                continue
            retargeted = node.deepcopy()
            retargeted["reftarget"] = candidate
            resolved = domain.resolve_xref(
                env, node["refdoc"], app.builder, node["reftype"], candidate, retargeted, contnode
            )
            if resolved is not None:
                return resolved
    return None


def _check_public_names(app, env):
    """Warn (an error under -W) about a public name that has no page, e.g. one added to __all__ later."""
    import mwkin.scale
    import mwkin.widgets

    logger = logging.getLogger(__name__)
    documented = env.get_domain("py").objects
    expected = [f"mwkin.{name}" for name in mwkin.__all__ if name not in ("demo", "__version__")]
    expected += ["mwkin.demo.survey"]
    expected += [f"mwkin.widgets.{name}" for name in mwkin.widgets.__all__]
    expected += [f"mwkin.scale.{name}" for name in mwkin.scale.__all__]
    for name in expected:
        if name not in documented:
            logger.warning("public name %s has no entry in the API reference (docs/api/*.rst)", name)


def _init_signature(app, what, name, obj, options, signature, return_annotation):
    """Widget classes: the signature of their __init__, not traitlets' generic __new__(*args, **kwargs)."""
    if what != "class" or signature != "(*args, **kwargs)" or "__init__" not in vars(obj):
        return None
    try:
        sig = inspect.signature(obj.__init__)
    except (TypeError, ValueError):
        return None
    params = list(sig.parameters.values())[1:]  # without self
    return str(sig.replace(parameters=params, return_annotation=inspect.Signature.empty)), return_annotation


# -- Example notebooks -------------------------------------------------------------------------------

NOTEBOOK_SOURCE = ROOT / "example_notebooks"
NOTEBOOK_COPY = DOCS / "notebooks"  # git-ignored; the notebooks run here and write into output/


def _copy_notebooks():
    """Mirror ../example_notebooks/*.ipynb into notebooks/ (a file is rewritten only when it changed)."""
    NOTEBOOK_COPY.mkdir(exist_ok=True)
    wanted = {path.name: path for path in sorted(NOTEBOOK_SOURCE.glob("*.ipynb"))}
    for stale in NOTEBOOK_COPY.glob("*.ipynb"):
        if stale.name not in wanted:
            stale.unlink()
    for name, path in wanted.items():
        copy = NOTEBOOK_COPY / name
        if not copy.exists() or not filecmp.cmp(path, copy, shallow=False):
            shutil.copyfile(path, copy)


_copy_notebooks()

nb_execution_mode = "force"  # run whenever Sphinx reads them: always from a clean _build, else when changed
nb_execution_timeout = 300  # seconds, per cell
nb_execution_raise_on_error = True
nb_execution_show_tb = True
nb_execution_in_temp = False  # run inside notebooks/, like the notebooks' own folder
nb_kernel_rgx_aliases = {".*": "python3"}
nb_merge_streams = True
nb_ipywidgets_js: dict[str, dict[str, str]] = {}  # would load require.js and the widget manager from a CDN

# Live widgets need a kernel and, in a static page, a widget manager from a CDN; neither is here. So
# each widget output becomes a one-line note (rather than its long text repr), and the saved widget
# state, megabytes per page with nothing to read it, is left out. Their figures still appear: the
# notebooks save them with export_figure and display the PNG files.
WIDGET_VIEW = re.compile(r'<script type="application/vnd\.jupyter\.widget-view\+json">.*?</script>', re.DOTALL)
WIDGET_NOTE = (
    '<p class="mwkin-widget-note"><em>[Interactive widget: it is drawn live in JupyterLab '
    "with a running kernel, not in this static page.]</em></p>"
)


def _static_widget_outputs(app, pagename, templatename, context, doctree):
    scripts = context.get("script_files")
    if isinstance(scripts, list):
        scripts[:] = [
            js
            for js in scripts
            if getattr(js, "attributes", {}).get("type") != "application/vnd.jupyter.widget-state+json"
        ]
    if "body" in context:
        context["body"] = WIDGET_VIEW.sub(WIDGET_NOTE, context["body"])


# The python3 kernel of this environment first, ahead of any user-wide kernel of the same name.
os.environ["JUPYTER_PATH"] = os.pathsep.join(
    p for p in (str(pathlib.Path(sys.prefix) / "share" / "jupyter"), os.environ.get("JUPYTER_PATH")) if p
)
os.environ.setdefault("PYDEVD_DISABLE_FILE_VALIDATION", "1")  # no debugger notice on the kernel's stderr
os.environ.setdefault("MPLBACKEND", "Agg")


def setup(app):
    app.connect("missing-reference", _public_reference)
    app.connect("autodoc-process-signature", _init_signature)
    app.connect("env-check-consistency", _check_public_names)
    app.connect("html-page-context", _static_widget_outputs, priority=900)  # after myst-nb's own
