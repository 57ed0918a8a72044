"""Save the design being edited as a design file, and load one back.

Files live in one folder chosen when the panel is made (the dashboard's design folder): a
name typed in the box may not leave it (no ``..``, no absolute paths), must end in ``.toml``,
and is written atomically after a full validation (:func:`cablekit.design.save_design`), so a
failed save never leaves a broken or half-written file.  Loading validates too: a broken file
lists its problems and the current design stays.
"""

from __future__ import annotations

from pathlib import Path

import ipywidgets as W

from ..design import dumps_design
from .state import DesignState
from .style import message_html

__all__ = ["SaveLoadPanel", "resolve_in_folder"]

_MAX_UPLOAD = 1_000_000  # bytes; a design file is a few kB


def resolve_in_folder(folder: Path, name: str) -> Path:
    """The path of file ``name`` inside ``folder``; ``ValueError`` when it would leave it."""
    name = name.strip()
    if not name:
        raise ValueError("file name: type a name such as 'my_rig.toml'")
    candidate = Path(name)
    if candidate.is_absolute() or ".." in candidate.parts:
        raise ValueError(f"file name: {name!r} must be a name inside {folder}, without '..' or a leading '/'")
    if candidate.suffix != ".toml":
        raise ValueError(f"file name: {name!r} should end in .toml")
    path = (folder / candidate).resolve()
    if folder.resolve() not in path.parents:
        raise ValueError(f"file name: {name!r} leaves the design folder {folder}")
    return path


class SaveLoadPanel(W.VBox):
    """Save / load / upload design files in ``folder``; shows the design file's text."""

    def __init__(self, state: DesignState, *, folder=None, **kwargs):
        self.state = state
        self.folder = Path(folder) if folder is not None else Path.cwd()
        default = f"{Path(state.path).stem}_edited.toml" if state.path else "edited_design.toml"
        self.name = W.Text(value=default, description="design file (.toml)", style={"description_width": "130px"},
                           layout=W.Layout(width="420px"))
        self.save_button = W.Button(description="Save design", icon="save", button_style="primary")
        self.load_button = W.Button(description="Load design", icon="folder-open")
        self.upload = W.FileUpload(accept=".toml", multiple=False, description="Upload .toml")
        from .dashboard import demo_designs

        self._demos = demo_designs()
        self.demo = W.Dropdown(options=[("open a bundled demo ...", "")] + [(k, k) for k in self._demos],
                               value="", layout=W.Layout(width="300px"))
        self.demo.observe(self._open_demo, "value")
        self.message = W.HTML()
        self.message.add_class("ck-file-message")
        self.text = W.Textarea(disabled=True, layout=W.Layout(width="100%", height="260px"))
        viewer = W.Accordion(children=[self.text], titles=("design file text (read only)",))
        viewer.selected_index = None
        self.save_button.on_click(lambda _: self.save())
        self.load_button.on_click(lambda _: self.load())
        self.upload.observe(self._uploaded, "value")
        super().__init__(children=[
            W.HTML(f"<span style='font-size:12px'>files are read from and written to <code>{self.folder}</code></span>"),
            self.name, W.HBox([self.save_button, self.load_button, self.upload]), self.demo, self.message, viewer],
            **kwargs)
        self.add_class("ck-files")
        state.observe(self._show_text, "design")
        self._show_text()

    def _show_text(self, change=None) -> None:
        self.text.value = dumps_design(self.state.design)

    def _report(self, ok: bool) -> None:
        s = self.state
        self.message.value = message_html(s.status, level="ok" if ok else "error", lines=() if ok else s.problems)

    def _with_path(self, action) -> bool:
        """Run ``action(path)`` for the typed name inside the folder; report the outcome."""
        try:
            path = resolve_in_folder(self.folder, self.name.value)
        except ValueError as exc:
            self.message.value = message_html(str(exc), level="error")
            return False
        ok = action(path)
        self._report(ok)
        return ok

    def save(self) -> bool:
        """Save the current design under the typed name (validated, atomic)."""
        header = f"saved from a cablekit dashboard: {self.state.design.meta.name}"
        return self._with_path(lambda path: self.state.save(path, header=header))

    def load(self) -> bool:
        """Load the typed file name from the folder."""
        return self._with_path(self.state.load)

    def _open_demo(self, change) -> None:
        if change.new:
            self._report(self.state.load(self._demos[change.new]))

    def _uploaded(self, change) -> None:
        files = change.new
        if not files:
            return
        item = files[0]
        name = item.get("name", "upload.toml")
        content = bytes(item.get("content", b""))
        if len(content) > _MAX_UPLOAD:
            self.message.value = message_html(f"{name}: larger than {_MAX_UPLOAD // 1000} kB, not a design file",
                                              level="error")
            return
        try:
            text = content.decode("utf-8")
        except UnicodeDecodeError:
            self.message.value = message_html(f"{name}: not a UTF-8 text file", level="error")
            return
        self._report(self.state.loads(text, source=name))
