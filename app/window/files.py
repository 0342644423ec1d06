"""Project and stack commands of the main window (a mixin of :class:`MainWindow`).

New / open / save / save as / recent projects, adding stacks by dialog or drag & drop,
the properties editor and the calibration tool, the unsaved-changes question and the
crash-recovery offer. Every failure is shown with the file and the problem; the project
in memory is never lost by a failed open or save.
"""

from __future__ import annotations

from pathlib import Path

from PySide6.QtWidgets import QFileDialog, QMessageBox

from analysis.errors import InputError
from app.core.autosave import compare_with_project, find_recoverable, keep_aside, load_recovered
from app.core.project_lock import ProjectLock, live_lock_owner
from app.core.errors import one_line
from app.microscopy.calibration import CalibrationDialog
from app.window.properties_dialog import PropertiesDialog, stack_note
from app.window.temperature_source_dialog import TemperatureSourceDialog, frame_span
from app.window.settings_dialog import AnalysisSettingsDialog
from app.window.stack_import import experiments_from_paths, is_stack_path

PROJECT_FILTER = "spherokin projects (*.spherokin.json);;All files (*)"
STACK_FILTER = "Stacks and videos (*.tif *.tiff *.avi *.mp4 *.mov *.mkv);;All files (*)"
MAX_RECENT = 8


class WindowFilesMixin:
    """Needs ``self.model``, ``self.settings``, ``self.autosaver``, ``self.menus``."""

    # ---------------------------------------------------------------- project files
    def new_project(self) -> None:
        if self.confirm_discard_or_save():
            self.autosaver.discard()
            self.model.new_project()
            self.hold_project_lock(None)

    def open_project_dialog(self) -> None:
        path, _ = QFileDialog.getOpenFileName(self, "Open project", self._last_folder(), PROJECT_FILTER)
        if path:
            self.open_project_path(path)

    def open_project_path(self, path: str, *, ask: bool = True, read_only: bool = False) -> bool:
        """Open ``path`` (asking about unsaved changes first); False if not opened.

        ``read_only`` (screenshots): no lock, no recovery offer, open even if another
        window has the project.
        """
        if not read_only and not self.project_is_free(path):
            return False
        if ask and not self.confirm_discard_or_save():
            return False
        try:
            from analysis.project.file import load_project

            project = load_project(path)
        except Exception as exc:  # bad file: one line; a bug: the internal-error dialog
            self.show_error("Cannot open the project", exc)
            return False
        self.autosaver.discard()
        self.model.replace_project(project)
        if read_only:
            return True
        self.hold_project_lock(project.path)
        self.add_recent(project.path)
        self.offer_recovery([project.path], include_untitled=False)
        return True

    # ---------------------------------------------------------------- one window per project
    def project_is_free(self, path: str) -> bool:
        """False (with a message) when another live window has ``path`` open."""
        if path and str(Path(path).resolve()) == (self.model.path or ""):
            return True
        owner = live_lock_owner(Path(path).resolve())
        if owner is None:
            return True
        from app.core.project_lock import lock_path_for

        self.show_problem("The project is open in another window", (
            f"{path} is open in another spherokin window ({owner.describe()}). Switch to that "
            f"window; if that session has ended on another computer, delete "
            f"{lock_path_for(Path(path).resolve())}."))
        return False

    def hold_project_lock(self, path: str | None) -> None:
        """Hold the lock of ``path`` (None: of no project), releasing the previous one."""
        current = getattr(self, "_project_lock", None)
        if current is not None and path is not None and current.project_path == str(path):
            return
        if current is not None:
            current.release()
        self._project_lock = None
        if path:
            self._project_lock = ProjectLock(path)
            self._project_lock.acquire()

    def save_project(self) -> bool:
        if not self.model.path:
            return self.save_project_as()
        return self._save_to(self.model.path)

    def save_project_as(self) -> bool:
        suggested = self.model.path or str(Path(self._last_folder()) / "project.spherokin.json")
        path, _ = QFileDialog.getSaveFileName(self, "Save project as", suggested, PROJECT_FILTER)
        if not path:
            return False
        if not path.endswith(".spherokin.json"):
            path = str(Path(path).with_suffix("")) + ".spherokin.json"
        return self._save_to(path)

    def _save_to(self, path: str) -> bool:
        if not self.project_is_free(path):
            return False
        old_side = self.autosaver.side_path()
        try:
            saved = self.model.save(path)
        except Exception as exc:  # the project stays in memory, still marked unsaved
            self.show_error("Could not save", exc)
            return False
        old_side.unlink(missing_ok=True)
        self.hold_project_lock(saved)
        self.add_recent(saved)
        self.statusBar().showMessage(f"Saved {saved}", 4000)
        return True

    def confirm_discard_or_save(self) -> bool:
        """True when it is fine to drop the current project (saved, discarded)."""
        if not self.model.is_dirty():
            return True
        answer = self.ask_unsaved_changes()
        if answer == "save":
            return self.save_project()
        return answer == "discard"

    def ask_unsaved_changes(self) -> str:
        """'save', 'discard' or 'cancel' (a dialog; tests replace this method)."""
        box = QMessageBox(QMessageBox.Question, "Unsaved changes",
                          "The project has unsaved changes. Save them?",
                          QMessageBox.Save | QMessageBox.Discard | QMessageBox.Cancel, self)
        box.setDefaultButton(QMessageBox.Save)
        choice = box.exec()
        return {QMessageBox.Save: "save", QMessageBox.Discard: "discard"}.get(choice, "cancel")

    # ---------------------------------------------------------------- recent files
    def recent_projects(self) -> list[str]:
        value = self.settings.value("recent_projects", [])
        if isinstance(value, str):
            value = [value]
        return [str(v) for v in (value or [])]

    def add_recent(self, path: str | None) -> None:
        if not path:
            return
        recent = [path] + [p for p in self.recent_projects() if p != path]
        self.settings.setValue("recent_projects", recent[:MAX_RECENT])
        self.settings.setValue("last_folder", str(Path(path).parent))
        self.build_recent_menu()

    def build_recent_menu(self) -> None:
        if not hasattr(self, "_recent_menu"):
            self._recent_menu = self.menus["File"].addMenu("Open &recent")
            self.menus["File"].insertMenu(self.actions_by_id["save"], self._recent_menu)
        self._recent_menu.clear()
        for path in self.recent_projects():
            action = self._recent_menu.addAction(path)
            action.triggered.connect(lambda _c=False, p=path: self.open_project_path(p))
        self._recent_menu.setEnabled(bool(self.recent_projects()))

    def _last_folder(self) -> str:
        return str(self.settings.value("last_folder", str(Path.home())))

    # ---------------------------------------------------------------- stacks
    def add_stacks_dialog(self) -> None:
        paths, _ = QFileDialog.getOpenFileNames(self, "Add stacks", self._last_folder(), STACK_FILTER)
        self.add_stack_paths(paths)

    def add_folder_dialog(self) -> None:
        path = QFileDialog.getExistingDirectory(self, "Add a folder of frames", self._last_folder())
        if path:
            self.add_stack_paths([path])

    def add_stack_paths(self, paths) -> int:
        """Add one experiment per usable path (one undo entry); returns how many."""
        experiments, problems = experiments_from_paths(paths)
        if experiments:
            self.model.add_experiments(experiments, f"Add {len(experiments)} stack(s)")
            self.model.select(self.model.experiment_count() - 1)
        if problems:
            self.show_problem("Some files could not be added", "\n".join(problems))
        return len(experiments)

    def dragEnterEvent(self, event) -> None:
        if any(url.isLocalFile() for url in event.mimeData().urls()):
            event.acceptProposedAction()

    def dropEvent(self, event) -> None:
        paths = [url.toLocalFile() for url in event.mimeData().urls() if url.isLocalFile()]
        projects = [p for p in paths if p.endswith(".spherokin.json")]
        if projects:
            self.open_project_path(projects[0])
        else:
            self.add_stack_paths([p for p in paths if is_stack_path(p)] or paths)
        event.acceptProposedAction()

    def remove_experiment(self) -> None:
        if self.model.current_index >= 0:
            self.model.remove_experiment(self.model.current_index)

    # ---------------------------------------------------------------- properties, calibration
    def edit_properties(self) -> None:
        self.edit_properties_of(self.model.current_index)

    def edit_analysis_settings(self) -> None:
        """Edit the current experiment's analysis settings; applying them analyses it again."""
        index = self.model.current_index
        if index < 0:
            return
        choice = self.ask_analysis_settings(index)
        if choice is not None:
            self.apply_analysis_settings(index, *choice)

    def ask_analysis_settings(self, index: int):
        """(settings, to_all) from the dialog, or None when cancelled (tests replace this)."""
        experiment = self.model.experiment(index)
        dialog = AnalysisSettingsDialog(experiment.name, experiment.settings,
                                        several=self.model.experiment_count() > 1, parent=self)
        if not dialog.exec():
            return None
        return dialog.settings(), dialog.apply_to_all.isChecked()

    def apply_analysis_settings(self, index: int, settings, to_all: bool = False) -> None:
        """Store ``settings`` on one (or every) experiment as ONE undo step, then analyse
        the experiments whose settings changed."""
        targets = range(self.model.experiment_count()) if to_all else [index]
        changed = [i for i in targets if self.model.experiment(i).settings != settings]
        if not changed:
            return
        stack = self.model.undo_stack
        stack.beginMacro("Analysis settings of " + (
            "every experiment" if to_all else self.model.experiment(index).name))
        for i in changed:
            self.model.set_experiment_properties(i, settings=settings)
        stack.endMacro()
        self.runner.run(changed)

    def edit_properties_of(self, index: int) -> None:
        if index < 0:
            return
        experiment = self.model.experiment(index)
        try:
            note = stack_note(self.model.frame_stack(index))
        except InputError as exc:
            note = f"The stack cannot be read: {one_line(exc)}"
        dialog = PropertiesDialog(experiment, note, self)
        if dialog.exec():
            changes = dialog.changes()
            if changes:
                self.model.set_experiment_properties(
                    index, f"Edit properties of {experiment.name}", **changes)

    def edit_temperature_source(self) -> None:
        self.edit_temperature_source_of(self.model.current_index)

    def edit_temperature_source_of(self, index: int) -> None:
        """Kind and temperature source of one experiment (one undo step); the ramp fit is
        redone from the analysis, or the experiment is analysed if it never was."""
        if index < 0:
            return
        values = self.ask_temperature_source(index)
        if not values:
            return
        experiment = self.model.experiment(index)
        changes = {k: v for k, v in values.items() if getattr(experiment, k) != v}
        if changes:
            self.model.set_experiment_properties(index, f"Temperature of {experiment.name}", **changes)
            if self.model.analysis(index) is None and values["kind"] == "ramp":
                self.runner.run([index])

    def ask_temperature_source(self, index: int):
        """The dialog's ``{"kind", "temperature_source"}``, or None when cancelled (tests replace this)."""
        try:
            span = frame_span(self.model.frame_stack(index))
        except InputError:
            span = None
        dialog = TemperatureSourceDialog(self.model.experiment(index), span, self)
        return dialog.result_values() if dialog.exec() else None

    def calibrate(self) -> None:
        """Measure the scale on the current frame or on a stage-micrometer image file."""
        index = self.model.current_index
        if index < 0:
            return
        source = self.ask_calibration_source()
        if source is None:
            return
        path = ""
        if source == "file":
            path, _ = QFileDialog.getOpenFileName(self, "Stage micrometer image",
                                                  self._last_folder(), STACK_FILTER)
            if not path:
                return
        try:
            image = self._calibration_image(path, index)
        except Exception as exc:
            self.show_error("Cannot read the image", exc)
            return
        dialog = CalibrationDialog(image, Path(path).name if path else "current frame",
                                   self.model.experiment_count() > 1, self,
                                   current_um_per_px=self.model.experiment(index).um_per_px)
        if dialog.exec() and dialog.um_per_px is not None:
            self.apply_calibration(dialog.um_per_px, dialog.apply_all.isChecked())

    def ask_calibration_source(self) -> str | None:
        """'file' (a micrometer image), 'frame' (the frame on screen) or None (cancel)."""
        box = QMessageBox(QMessageBox.Question, "Calibrate the scale",
                          "Measure on an image of a stage micrometer, or on the frame shown "
                          "(if it contains a feature of known size)?", QMessageBox.Cancel, self)
        from_file = box.addButton("Micrometer image…", QMessageBox.AcceptRole)
        from_frame = box.addButton("Frame shown", QMessageBox.AcceptRole)
        box.exec()
        return {from_file: "file", from_frame: "frame"}.get(box.clickedButton())

    def locate_stack(self) -> None:
        """Point the current experiment to its stack where it is now (one undo step)."""
        index = self.model.current_index
        if index < 0:
            return
        experiment = self.model.experiment(index)
        missing = Path(experiment.stack_path)
        start = str(missing.parent if missing.parent.is_dir() else self._last_folder())
        if missing.suffix:
            path, _ = QFileDialog.getOpenFileName(self, f"Where is {missing.name} now?", start,
                                                  STACK_FILTER)
        else:  # a folder of frames
            path = QFileDialog.getExistingDirectory(self, f"Where is the folder {missing.name} now?",
                                                    start)
        if path:
            self.model.set_experiment_properties(
                index, text=f"Locate the stack of {experiment.name}",
                stack_path=str(Path(path).resolve()))

    def _calibration_image(self, path: str, index: int):
        if path:
            from analysis.stack.frames import open_stack

            return open_stack(path)[0]
        return self.model.frame_stack(index)[self.viewer.frame]

    def apply_calibration(self, um_per_px: float, to_all: bool) -> None:
        """Set µm/px on the current (or every) experiment as ONE undo entry."""
        stack = self.model.undo_stack
        targets = range(self.model.experiment_count()) if to_all else [self.model.current_index]
        stack.beginMacro(f"Calibrate {um_per_px:.4g} µm/px")
        for index in targets:
            self.model.set_experiment_properties(index, um_per_px=um_per_px)
        stack.endMacro()

    # ---------------------------------------------------------------- crash recovery
    def offer_recovery(self, project_paths=None, *, include_untitled: bool = True) -> bool:
        """Offer to recover autosaved work; True if something was recovered.

        Nothing the user has not chosen to discard is deleted: a failed recovery keeps
        the autosave and says where it is; "keep" sets it aside for the next start. An
        autosave identical to its saved project holds nothing to lose and is removed.
        """
        paths = self.recent_projects() if project_paths is None else list(project_paths)
        offered = self.__dict__.setdefault("_autosaves_offered", set())
        folder = self.autosaver.recovery_dir if include_untitled else None
        for item in find_recoverable(folder, paths):
            if item.autosave_path in offered:
                continue  # asked once this session: kept for the next start
            offered.add(item.autosave_path)
            comparison = compare_with_project(item)
            if comparison.status == "same":
                item.autosave_path.unlink(missing_ok=True)
                continue
            choice = self.ask_recover(item, comparison)
            choice = {True: "recover", False: "keep"}.get(choice, choice)
            if choice == "recover" and self.recover(item):
                return True
            if choice == "delete":
                item.autosave_path.unlink(missing_ok=True)
            elif choice == "keep":
                self._keep_autosave(item)
        return False

    def _keep_autosave(self, item) -> None:
        try:
            kept = keep_aside(item)
            self.__dict__.setdefault("_autosaves_offered", set()).add(kept)
        except OSError as exc:
            kept = item.autosave_path
            self.show_problem("Autosave kept", f"{kept}: could not be renamed ({exc.strerror}); "
                              "it is kept where it is, but a new autosave may replace it")
            return
        self.statusBar().showMessage(f"Autosave kept as {kept}", 8000)

    def ask_recover(self, item, comparison=None) -> str:
        """'recover', 'keep' or 'delete' for ``item`` (a dialog; tests replace this method)."""
        newer_project = comparison is not None and comparison.status == "project-newer"
        box = QMessageBox(QMessageBox.Warning if newer_project else QMessageBox.Question,
                          "Recover unsaved work?",
                          f"spherokin did not close normally. Unsaved work was autosaved in "
                          f"{item.autosave_path} for {item.describe()}.\n\n"
                          f"{comparison.text if comparison else ''}", QMessageBox.NoButton, self)
        recover = box.addButton("Recover", QMessageBox.AcceptRole)
        keep = box.addButton("Keep for later", QMessageBox.RejectRole)
        delete = box.addButton("Delete the autosave", QMessageBox.DestructiveRole)
        box.setDefaultButton(keep if newer_project else recover)
        box.setEscapeButton(keep)
        box.exec()
        return {recover: "recover", delete: "delete"}.get(box.clickedButton(), "keep")

    def recover(self, item) -> bool:
        """Load the autosave; on failure it is kept and the message says where."""
        try:
            project = load_recovered(item)
        except InputError as exc:
            self.show_problem("Cannot recover", f"{one_line(exc)}\nThe autosave is kept at {item.autosave_path}.")
            return False
        except Exception as exc:  # a bug: logged, internal-error dialog; the autosave is kept too
            self.show_error("Cannot recover", exc)
            return False
        self.model.replace_project(project, recovered=True)
        self.hold_project_lock(project.path)
        written = self.autosaver.autosave()  # the recovered work is protected again at once
        if written is not None and item.autosave_path != written:
            item.autosave_path.unlink(missing_ok=True)
        return True
