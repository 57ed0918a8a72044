"""``PlotFigure``: plotly's ``go.FigureWidget`` made dependable inside dashboards.

Two things go wrong with a plain ``go.FigureWidget`` in a Voila dashboard (measured here):

1. **Stale state for a page that connects later.**  The figure's synced state
   (``_widget_data``, ``_widget_layout``) is refreshed only when the figure itself is
   displayed; a figure inside a container (a ``VBox``) that is updated afterwards sends the
   changes as one-off messages only.  Voila runs the notebook first and the page asks for the
   widgets' state afterwards, so it gets the figure as it was *built*, empty.
   ``PlotFigure`` keeps that state equal to the figure after every change, without sending
   it again (the messages already carry the change to pages that are connected).
2. **A two-second start-up limit.**  The front-end module is plotly.js itself (about 5 MB)
   and anywidget gives a model two seconds to load it; on a loaded 2-core machine parsing it
   took 3-4 s, after which the model is marked failed and every update is dropped.
   ``PlotFigure`` swaps the front-end module for a few lines that load plotly's own module
   **once per page**, in the background, shared by every figure, and hand each figure over to
   it when ready; updates arriving meanwhile are kept and replayed in order.

The Python side is plotly's class unchanged: traces, ``batch_update``, ``data``, ``layout``.
"""

from __future__ import annotations

import hashlib
from copy import deepcopy
from functools import lru_cache
from pathlib import Path

import plotly.graph_objects as go
import traitlets

__all__ = ["PlotFigure", "show_figure"]

# field names whose change events plotly's front-end model listens to
_EVENTS = ["_widget_data", "_widget_layout", "_py2js_addTraces", "_py2js_deleteTraces", "_py2js_moveTraces",
           "_py2js_restyle", "_py2js_relayout", "_py2js_update", "_py2js_animate", "_py2js_removeLayoutProps",
           "_py2js_removeTraceProps"]

_LOADER = """
const KEY = "__cablekit_plotly_modules__";
const EVENTS = %s;

function plotlyModule(model) {
  const cache = (globalThis[KEY] ??= {});
  const hash = model.get("_ck_bundle_hash");
  if (!cache[hash]) {
    const url = URL.createObjectURL(new Blob([model.get("_ck_bundle")], { type: "text/javascript" }));
    cache[hash] = import(url).finally(() => URL.revokeObjectURL(url));
  }
  return cache[hash];
}

export default () => {
  let inner = null;
  let loaded = null;
  return {
    initialize({ model }) {
      const queue = [];
      const handlers = {};
      const overrides = new Map();
      const proxy = {
        get: (k) => (overrides.has(k) ? overrides.get(k) : model.get(k)),
        set: (k, v) => model.set(k, v),
        on: (ev, fn) => { (handlers[ev] ??= []).push(fn); model.on(ev, fn); },
        off: (ev, fn) => model.off(ev, fn),
        save_changes: () => model.save_changes(),
        send: (...args) => model.send(...args),
        get widget_manager() { return model.widget_manager; },
      };
      const capture = EVENTS.map((k) => {
        const fn = () => { if (!inner) queue.push([k, model.get(k)]); };
        model.on("change:" + k, fn);
        return [k, fn];
      });
      loaded = plotlyModule(model).then((mod) => {
        inner = mod.default();
        inner.initialize({ model: proxy });
        for (const [k, fn] of capture) model.off("change:" + k, fn);
        for (const [k, v] of queue) {
          overrides.set(k, v);
          for (const fn of handlers["change:" + k] ?? []) fn();
          overrides.delete(k);
        }
      });
    },
    async render({ el, model }) {
      await loaded;
      return inner.render({ el, model });
    },
  };
};
""" % ("[" + ", ".join(f'"{e}"' for e in _EVENTS) + "]")


@lru_cache(maxsize=1)
def _plotly_module() -> tuple[str, str]:
    esm = go.FigureWidget._esm
    text = Path(esm).read_text(encoding="utf-8") if isinstance(esm, Path) else str(esm)
    return text, hashlib.sha256(text.encode("utf-8")).hexdigest()


class PlotFigure(go.FigureWidget):
    """A ``go.FigureWidget`` whose plotly.js loads once per page, in the background."""

    _esm = _LOADER
    _ck_bundle = traitlets.Unicode().tag(sync=True)
    _ck_bundle_hash = traitlets.Unicode().tag(sync=True)

    @traitlets.default("_ck_bundle")
    def _default_bundle(self) -> str:
        return _plotly_module()[0]

    @traitlets.default("_ck_bundle_hash")
    def _default_bundle_hash(self) -> str:
        return _plotly_module()[1]

    # -- keep the synced state current (see the module notes, point 1) ---------------------
    def _keep_state(self) -> None:
        # set the stored trait values directly: no change event and no message, since the
        # change itself was just sent; a page that connects later reads these values
        self._trait_values["_widget_data"] = deepcopy(self._data)
        self._trait_values["_widget_layout"] = deepcopy(self._layout_obj._props)


def _keeping_state(name: str):
    """Plotly's message sender ``name``, followed by :meth:`PlotFigure._keep_state`."""
    def method(self, *args, **kwargs):
        getattr(super(PlotFigure, self), name)(*args, **kwargs)
        self._keep_state()

    method.__name__ = name
    return method


# every way plotly's Python side sends a change of the figure to the page
SENDERS = ("_send_relayout_msg", "_send_restyle_msg", "_send_update_msg", "_send_addTraces_msg",
           "_send_deleteTraces_msg", "_send_moveTraces_msg", "_send_animate_msg")
for _name in SENDERS:
    setattr(PlotFigure, _name, _keeping_state(_name))

def show_figure(target: go.FigureWidget, source: go.Figure) -> None:
    """Make ``target`` show ``source`` (a result's ``.figure()``), updating traces in place.

    When both have the same number and types of traces the traces and the layout are updated
    inside one ``batch_update`` (one message to the page); otherwise the traces are replaced.
    """
    data = [t.to_plotly_json() for t in source.data]
    layout = source.layout.to_plotly_json()
    same = len(target.data) == len(data) and all(t.type == d.get("type") for t, d in zip(target.data, data))
    if not same:
        target.data = []
        target.add_traces(data)
    with target.batch_update():
        if same:
            for t, d in zip(target.data, data):
                t.update(d, overwrite=True)
        target.layout.update(layout, overwrite=True)
