"""The trim screen: the heat and its analysis on the left, the plan on the right.

Every change of an input bumps ``revision`` and asks a thread worker for a new plan; a plan
that comes back for an older revision is dropped, so the panel only ever calls current a plan
made from exactly the inputs on screen. The dialogs are imported when first opened and the solver
in the first plan's worker, after the first frame: neither delays the screen's start-up.

Long because: every action of the main screen (open a heat, read an export, accept, ticket, the
materials, add an element, revert) reads and changes the one heat on screen and the plan shown for
it, the screen's own state; its widgets, dialogs and the accept and ticket flows already live in
modules of their own. Moving the file actions (open a heat, read an export) out is the next split.
"""

from __future__ import annotations

from collections.abc import Mapping
from datetime import datetime
from pathlib import Path
from typing import TYPE_CHECKING

from textual import events, on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, VerticalScroll
from textual.content import Content
from textual.message import Message
from textual.screen import Screen
from textual.widget import Widget
from textual.widgets import Input, Static
from textual.worker import Worker, WorkerState, get_current_worker

from meltfix.base.errors import InputError
from meltfix.base.paths import demo_dir
from meltfix.plan.numbers import cell_text, mass_text, temperature_text
from meltfix.plan.result import Plan, RiskPlan
from meltfix.shop.elements import element_sort_key, normalise_symbol
from meltfix.shop.heat import Heat, load_heat
from meltfix.shop.recipes import RecipeBook
from meltfix.tui.draft import BATH, CAPACITY, GRADE, MATERIALS, HeatInputs, build_heat, mass_field, temperature_field
from meltfix.tui.messages import PlanFailed, PlanReady
from meltfix.tui.palette import ScreenActions
from meltfix.tui.widgets.analysis_grid import AnalysisGrid, CellSpec, window_hint
from meltfix.tui.widgets.footer import KeysFooter
from meltfix.tui.widgets.heat_form import CycleField, GradeField, HeatForm
from meltfix.tui.widgets.plan_view import PlanView
from meltfix.tui.widgets.why_not import key_for, say_why_declined

if TYPE_CHECKING:
    from meltfix.plan.risk import RiskPlanner
    from meltfix.readers.samples import ImportResult, SpectroSample
    from meltfix.records.logbook.location import LogbookLocation

_FIELD_NAMES = {BATH: "bath", CAPACITY: "vessel", GRADE: "grade", "analysis": "analysis", MATERIALS: "materials"}
MOVING_KEYS = (
    ("Tab / Shift+Tab", "next / previous field, then the plan and the cautions"),
    ("↓ ↑", "next / previous field of the heat and the analysis (scroll in the plan)"),
    ("Enter", "next cell; on the grade: pick the grade; on the stage: change it"),
    ("letters on the grade", "open the grade picker filtered by what you type"),
    ("← → Space on the stage", "step through the shop's stages"),
    ("Ctrl+P", "command palette: every action by name"),
    ("Ctrl+Q", "quit"),
)


class TrimScreen(Screen[None]):
    # trim.tcss beside this file is read by the app itself (MeltfixApp.CSS_PATH), before the first frame.
    VERTICAL_BREAKPOINTS = [(0, "-short"), (30, "-tall")]
    AUTO_FOCUS = ".cell"  # the analysis is what changes most between two plans
    COMMANDS = {ScreenActions}
    BINDINGS = [
        Binding("f1", "keys", "Help", tooltip="List every key", id="trim.keys"),
        Binding("f2", "pick_grade", "Grade", tooltip="Pick the grade, typing to filter",
                id="trim.grade"),
        Binding("f3", "open_heat", "Open", tooltip="Open a heat file (HEAT.toml)", id="trim.open"),
        Binding("f4", "read_export", "Spectro",
                tooltip="Read a spectrometer export into the analysis", id="trim.spectro"),
        Binding("f5", "materials", "Materials",
                tooltip="Switch materials off or on, change price or stock, lock an amount", id="trim.materials"),
        Binding("f6", "accept", "Accept", tooltip="Accept the plan and record it in the logbook",
                id="trim.accept"),
        Binding("f7", "ticket", "Ticket", tooltip="Write the plan as a ticket for the furnace crew",
                id="trim.ticket"),
        Binding("f8", "record_added", "Added",
                tooltip="Record what actually went in (after accepting)", id="trim.added"),
        Binding("f9", "app.open_extra('replay')", "Replay", show=False,
                tooltip="Step through a recorded heat", id="trim.replay"),
        Binding("f10", "app.open_extra('logbook')", "Logbook", show=False,
                tooltip="The shift's heats and their costs", id="trim.logbook"),
        Binding("ctrl+n", "add_element", "Element", show=False, tooltip="Add a cell for another element",
                id="trim.element"),
        Binding("ctrl+r", "revert", "Revert", show=False, tooltip="Back to the heat as opened", id="trim.revert"),
        Binding("down", "step_field(1)", show=False),
        Binding("up", "step_field(-1)", show=False),
    ]

    def __init__(self, book: RecipeBook, heat: Heat, *, heat_path: Path | None = None,
                 logbook_path: LogbookLocation | None = None, tickets_dir: Path) -> None:
        super().__init__()
        self.book = book
        self.logbook_path = logbook_path
        """The logbook file; None = the logbook's own default (its environment variable)."""
        self.tickets_dir = tickets_dir
        self.base = heat
        """The heat minus what is typed on screen: its id and material overrides."""
        self.opened = heat
        self.heat_path = heat_path
        self.revision = 0
        self.current: tuple[Heat, Plan] | None = None
        """The heat and plan for exactly the inputs on screen, once the worker has made it."""
        self.current_risk: RiskPlan | None = None
        """The current plan's odds against the shop's target."""
        self.accepted: tuple[int, Plan, str] | None = None
        """The logbook's id of the plan accepted for this heat, that plan and the sample it answers."""
        self.imported: tuple[SpectroSample, dict[str, str]] | None = None
        """The spectrometer sample last read into the analysis, and the cells it filled."""
        self.plannable = False
        """The inputs hold together and the planner accepted them (a plan is, or is about to be, current)."""
        self._planner: RiskPlanner | None = None
        self._inputs: HeatInputs | None = None
        self._binding_state: tuple[bool, bool] | None = None
        self._resumed = False

    def post_message(self, message: Message) -> bool:
        if isinstance(message, events.ScreenResume) and not self._resumed:
            # Installing the screen resumes it with a restyle of every widget, each styled as it
            # mounted a moment before: once is enough (a later resume restyles as Textual decides).
            self._resumed = True
            message.refresh_styles = False
        elif isinstance(message, events.Resize) and message.size == self.outer_size:
            # Textual tells the screen the size it already has (after its first layout, and again
            # for the terminal's first size), each time laying out every widget anew to no effect.
            return True
        return super().post_message(message)

    # -- layout ---------------------------------------------------------------------------
    def compose(self) -> ComposeResult:
        # The breakpoint class the first resize would set, set before any widget is styled: that
        # resize then finds it in place instead of restyling every widget of the screen.
        height = self.app.size.height
        self.add_class(next(name for at, name in sorted(self.VERTICAL_BREAKPOINTS, reverse=True) if height >= at),
                       update=False)
        heat = self.base
        yield Static(id="banner")
        with Horizontal(id="body"):
            with VerticalScroll(id="inputs") as inputs:
                inputs.border_title = "Heat"
                yield HeatForm(heat.grade, *self._field_texts(heat)[:2], heat.stage, self._field_texts(heat)[2],
                               stages=tuple(self.book.settings.stages), units=self.book.settings.units, id="form")
                yield AnalysisGrid(self._row_specs(heat.grade, _cell_texts(heat)), id="grid")
            yield PlanView(id="plan")
        yield KeysFooter()

    def on_mount(self) -> None:
        self._update_banner()
        self.inputs_changed(base_changed=True)

    async def _show_heat(self, heat: Heat) -> None:
        """Put a whole heat on screen (opening a file, reverting) and plan it."""
        self.base = heat
        self.accepted = None
        self.imported = None
        self._sync_bindings()
        bath, capacity, temperature = self._field_texts(heat)
        self.query_one(HeatForm).set_values(heat.grade, bath, capacity, heat.stage, temperature)
        await self._set_rows(heat.grade, _cell_texts(heat))
        self._update_banner()
        self.inputs_changed(base_changed=True)

    def _field_texts(self, heat: Heat) -> tuple[str, str, str]:
        """Bath, vessel and temperature as their fields show them, in the shop's units."""
        units = self.book.settings.units
        return (mass_field(heat.bath_kg, units), mass_field(heat.capacity_kg, units),
                temperature_field(heat.temperature_c, units))

    def _row_specs(self, grade_name: str, texts: Mapping[str, str], extra: frozenset[str] = frozenset()) -> list[CellSpec]:
        """One cell per element of the grade (and its indices), per element with a value, and ``extra``."""
        grade = self.book.grade(grade_name)
        wanted = set(grade.elements) | {s for index in grade.indices for s in index.terms} | extra
        symbols = sorted(wanted | {s for s, t in texts.items() if t.strip()}, key=element_sort_key)
        return [CellSpec(s, texts.get(s, ""), window_hint(grade, s)) for s in symbols]

    async def _set_rows(self, grade_name: str, texts: Mapping[str, str], extra: frozenset[str] = frozenset()) -> None:
        await self.query_one(AnalysisGrid).set_rows(self._row_specs(grade_name, texts, extra))

    def _update_banner(self, heat: Heat | None = None) -> None:
        """The banner for ``heat`` (default: the base heat): the temperature follows the field."""
        heat = heat or self.base
        units = self.book.settings.units
        temperature = "" if heat.temperature_c is None else f" · {temperature_text(heat.temperature_c, units)}"
        self.query_one("#banner", Static).update(Content.assemble(
            ("meltfix", "bold"), (f" · {self.book.settings.shop_name}", "$foreground-muted"),
            " · heat ", (heat.heat_id, "bold"), temperature))

    # -- inputs -> plan -------------------------------------------------------------------
    def inputs_changed(self, *, base_changed: bool = False) -> None:
        """Re-read every input; plan in the background when they hold together, else say why not."""
        form, grid, view = self.query_one(HeatForm), self.query_one(AnalysisGrid), self.query_one(PlanView)
        inputs = HeatInputs(form.grade, form.bath_text, form.capacity_text, form.stage, grid.texts(),
                            form.temperature_text)
        if inputs == self._inputs and not base_changed:
            return  # a cell re-mounted or re-set to the same text: nothing to plan again
        self._inputs = inputs
        self.revision += 1
        self.current = None
        draft = build_heat(self.base, inputs, self.book)
        form.show_errors(draft.errors)
        grid.show_errors(draft.errors)
        self.plannable = draft.heat is not None
        if draft.heat is None:
            view.mark_stale(_summary(draft.errors))
        else:
            self._update_banner(draft.heat)
            view.mark_updating()
            if self._planner is None:  # the first plan: the frame paints first, then the solver loads
                self.call_after_refresh(self.plan_in_background, draft.heat, self.revision)
            else:
                self.plan_in_background(draft.heat, self.revision)
        self._sync_bindings()

    @work(thread=True, exclusive=True, exit_on_error=False, group="planner")
    def plan_in_background(self, heat: Heat, revision: int) -> None:
        if self._planner is None:
            from meltfix.plan.risk import RiskPlanner  # the solver loads here, after the first frame

            self._planner = RiskPlanner(self.book)
        try:
            risk = self._planner.plan(heat)
        except InputError as exc:
            self.post_message(PlanFailed(revision, exc.message))
            return
        if not get_current_worker().is_cancelled:
            self.post_message(PlanReady(revision, heat, risk.plan, risk))

    @on(PlanReady)
    def _plan_ready(self, message: PlanReady) -> None:
        if message.revision != self.revision:
            return  # made for inputs that have changed since
        self.current = (message.heat, message.plan)
        self.current_risk = message.risk
        self.query_one(PlanView).show(message.heat, message.plan, self.book.grade(message.heat.grade), message.risk,
                                      self.book.settings.units)

    @on(PlanFailed)
    def _plan_failed(self, message: PlanFailed) -> None:
        if message.revision == self.revision:
            self._no_plan(message.reason)

    def on_worker_state_changed(self, event: Worker.StateChanged) -> None:
        # The one place a planner fault lands: shown as the reason, never a traceback on screen.
        if event.worker.group == "planner" and event.state == WorkerState.ERROR:
            error = event.worker.error
            self._no_plan(f"the planner failed ({type(error).__name__}: {error})")

    def _no_plan(self, reason: str) -> None:
        self.plannable = False
        self.query_one(PlanView).mark_stale(reason)
        self._sync_bindings()

    def _sync_bindings(self) -> None:
        """Refresh the footer only when what can run has changed: a refresh rebuilds every key in it."""
        state = (self.plannable, self.accepted is not None)
        if state != self._binding_state:
            self._binding_state = state
            self.refresh_bindings()

    @on(Input.Changed, ".cell, #bath, #capacity, #temperature")
    def _input_changed(self, event: Input.Changed) -> None:
        # Every field says Changed as it mounts, with the text the screen has just read and planned:
        # reading all the fields again for each of them would find nothing new.
        if self._inputs is None or _typed(self._inputs, event.input.id or "") != event.value:
            self.inputs_changed()

    @on(CycleField.Changed)
    def _stage_changed(self) -> None:
        self.inputs_changed()

    @on(Input.Submitted, ".cell, #bath, #capacity, #temperature")
    def _submitted(self, event: Input.Submitted) -> None:
        fields = self._fields()
        if event.input is fields[-1]:
            self.query_one("#plan-body").focus()
        else:
            self.action_step_field(1)

    @on(GradeField.PickRequested)
    def _grade_requested(self, message: GradeField.PickRequested) -> None:
        self.action_pick_grade(message.typed)

    def _fields(self) -> list[Widget]:
        return [self.query_one(GradeField), self.query_one("#bath"), self.query_one("#capacity"),
                self.query_one(CycleField), self.query_one("#temperature"), *self.query(".cell")]

    # -- actions --------------------------------------------------------------------------
    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        if action in ("accept", "ticket"):
            # Greyed (None) while the inputs cannot be planned. While a plan is on its way (a few
            # ms) the key stays lit and the action itself waits for the plan to be current.
            return self.plannable or None
        if action == "record_added":
            return self.accepted is not None or None
        return True

    def on_key(self, event: events.Key) -> None:
        """A key whose action cannot run now reaches here (its binding declined it): say why."""
        say_why_declined(self, event, self.query_one(PlanView).why_not, self._why_not)

    def _why_not(self, action: str, parameters: tuple[object, ...]) -> str:
        if action == "record_added":
            return f"accept a plan first ({key_for(self, 'accept')}), then record what went in"
        return "waits for a plan of the inputs on screen (the line above says what stops it)"

    def action_step_field(self, step: int) -> None:
        fields = self._fields()
        focused = self.focused
        if focused in fields:
            fields[max(0, min(len(fields) - 1, fields.index(focused) + step))].focus()
        else:
            fields[0].focus()

    def action_keys(self) -> None:
        from meltfix.tui.screens.choice import ChoiceDialog
        from meltfix.tui.screens.help import KeysScreen
        from meltfix.tui.screens.materials import MaterialsDialog
        from meltfix.tui.screens.prompt import PromptDialog

        self.app.push_screen(KeysScreen(
            [("Trim screen", self.BINDINGS), ("Every screen", self.app.BINDINGS),
             ("Materials (F5)", MaterialsDialog.BINDINGS),
             ("Pick lists and questions", ChoiceDialog.BINDINGS + PromptDialog.BINDINGS)],
            extra=MOVING_KEYS))

    def action_pick_grade(self, typed: str = "") -> None:
        from meltfix.tui.screens.choice import ChoiceDialog

        items = [(name, f"{name}  ·  {grade.family}  ·  {grade.standard}".rstrip(" ·"))
                 for name, grade in self.book.grades.items()]

        async def chosen(name: str | None) -> None:
            if name is None:
                return
            form = self.query_one(HeatForm)
            form.query_one(GradeField).set_grade(name)
            await self._set_rows(name, self.query_one(AnalysisGrid).texts())
            self.inputs_changed()

        self.app.push_screen(ChoiceDialog("Grade", items, typed=typed, current=self.query_one(HeatForm).grade,
                                          noun="grades", searched="name, family and standard"),
                             chosen)

    def action_open_heat(self) -> None:
        from meltfix.tui.screens.open_file import OpenFileDialog

        folder = self.heat_path.parent if self.heat_path else _demo_folder("heats")

        def read(path: Path) -> tuple[Path, Heat]:
            return path, load_heat(path, self.book)

        async def opened(result: tuple[Path, Heat] | None) -> None:
            if result is not None:
                self.heat_path, heat = result
                self.opened = heat
                await self._show_heat(heat)

        self.app.push_screen(OpenFileDialog("Open a heat file", folder, [".toml"], read), opened)

    def action_read_export(self) -> None:
        from meltfix.readers.spectro import read_export
        from meltfix.tui.screens.choice import ChoiceDialog
        from meltfix.tui.screens.open_file import OpenFileDialog

        folder = _demo_folder("spectro")

        def read(path: Path) -> ImportResult:
            return read_export(path, settings=self.book.settings)

        def samples_read(result: ImportResult | None) -> None:
            if result is None:
                return
            samples = list(result.samples)
            if not samples:
                self.notify("The export holds no sample.", title="Spectrometer", severity="warning")
            elif len(samples) == 1:
                self._offer_sample(samples[0])
            else:
                items = [(str(k), f"{s.sample_id}  ·  {len(s.accepted_burns)} burns" + ("  ·  flagged" if s.flags else ""))
                         for k, s in enumerate(samples)]

                def picked(key: str | None) -> None:
                    if key is not None:
                        self._offer_sample(samples[int(key)])

                self.app.push_screen(ChoiceDialog("Which sample?", items, current=items[-1][0], noun="samples",
                                                  searched="id and burns"), picked)

        self.app.push_screen(OpenFileDialog("Read a spectrometer export", folder, [".csv", ".txt", ".tsv"], read),
                             samples_read)

    def _offer_sample(self, sample: SpectroSample) -> None:
        """Load the sample, after a confirmation naming both heats when the export says it is another heat's."""
        from meltfix.tui.screens.choice import ChoiceDialog

        this = self.base.heat_id
        if not sample.heat or sample.heat == this:
            self.call_later(self._use_sample, sample)
            return
        items = [("keep", f"No: keep the analysis of heat {this}"),
                 ("load", f"Yes: load sample {sample.sample_id} of heat {sample.heat} onto heat {this}")]

        def answered(key: str | None) -> None:
            if key == "load":
                self.call_later(self._use_sample, sample)

        self.app.push_screen(ChoiceDialog(f"Sample of heat {sample.heat}, not {this}", items, current="keep"),
                             answered)

    async def _use_sample(self, sample: SpectroSample) -> None:
        """A new sample replaces the whole analysis: cells it does not report are emptied."""
        form = self.query_one(HeatForm)
        grade = form.grade
        texts = _cell_texts(sample)
        await self._set_rows(grade, texts)
        self.imported = (sample, texts)
        remarks = list(sample.flags)
        if form.temperature_text.strip():
            # The last reading belongs to the last sample: a stale one would allow the wrong chill.
            form.set_temperature_text("")
            remarks.append("the temperature field is cleared: type this sample's reading")
        # The export may name the sample's heat and grade: a mismatch is worth a second look.
        if sample.heat and sample.heat != self.base.heat_id:
            remarks.append(f"the export names heat {sample.heat}, this is heat {self.base.heat_id}")
        if sample.grade and sample.grade != grade:
            remarks.append(f"the export names grade {sample.grade}; the screen plans for {grade} (F2 changes it)")
        flags = "\n".join(f"• {remark}" for remark in remarks)
        self.notify(f"Analysis from sample {sample.sample_id}" + (f"\n{flags}" if flags else ""), title="Spectrometer",
                    severity="warning" if flags else "information", timeout=12 if flags else 4)
        self.inputs_changed()

    def action_materials(self) -> None:
        from meltfix.tui.screens.materials import MaterialsDialog

        def closed(heat: Heat | None) -> None:
            if heat is not None and heat != self.base:
                self.base = heat
                self.inputs_changed(base_changed=True)

        self.app.push_screen(MaterialsDialog(self.book, self.base, self.query_one(HeatForm).grade), closed)

    def action_accept(self) -> None:
        if self.current is None:
            self.notify("The plan is being brought up to date; try again in a moment.", title="Accept")
            return
        recorded = self._record(*self.current)
        if recorded is not None:
            closest = self.current[1].status != "optimal"
            self.notify(recorded[1], title="Accepted", severity="warning" if closest else "information")

    def _record(self, heat: Heat, plan: Plan) -> tuple[int, str] | None:
        """Record the plan (and the sample it answers) in the logbook: its plan number and what was
        recorded in words, or None when the logbook refused (said on screen)."""
        from meltfix.records.logbook import Logbook
        from meltfix.tui.accept import record_accepted

        try:
            with Logbook(self.logbook_path, book=self.book) as records:
                accepted = record_accepted(records, heat, plan, self._imported_sample())
        except Exception as exc:  # a logbook fault is reported; the plan on screen stays as it is
            self.notify(str(exc), title="Not recorded", severity="error")
            return None
        self.accepted = (accepted.plan_id, plan, accepted.sample_id)
        self._sync_bindings()
        sample = f"sample {accepted.sample_id}" + ("" if accepted.sample_is_new else " (already in the logbook)")
        closest = " — closest plan: the grade is NOT met" if plan.status != "optimal" else ""
        return accepted.plan_id, f"Plan {accepted.plan_id} recorded for heat {heat.heat_id}, {sample}{closest}"

    def _imported_sample(self) -> SpectroSample | None:
        """The spectrometer sample the analysis on screen is, unless a cell was changed since it was read."""
        if self.imported is None or self._inputs is None:
            return None
        sample, texts = self.imported
        return sample if _filled(self._inputs.cells) == _filled(texts) else None

    def action_record_added(self) -> None:
        from meltfix.tui.screens.added import AddedDialog

        if self.accepted is None:
            return
        plan_id, plan, _ = self.accepted

        def recorded(made: list[tuple[str, float]] | None) -> None:
            if made is None:
                return
            from meltfix.records.logbook import Logbook

            try:
                with Logbook(self.logbook_path, book=self.book) as records:
                    records.record_additions(plan.heat_id, made, plan_id)
            except Exception as exc:  # reported, never lost silently
                self.notify(str(exc), title="Not recorded", severity="error")
                return
            lines = ", ".join(f"{material} {mass_text(kg, self.book.settings.units)}" for material, kg in made)
            self.notify(f"Heat {plan.heat_id}: {lines}", title="Recorded as added")

        self.app.push_screen(AddedDialog(plan, self.book.settings.units), recorded)

    def action_ticket(self) -> None:
        from meltfix.tui.ticket import print_ticket, write_ticket

        if self.current is None:
            self.notify("The plan is being brought up to date; try again in a moment.", title="Ticket")
            return
        heat, plan = self.current
        # A ticket always carries its plan number, so what the crew signs can be traced in the
        # logbook: a plan not accepted yet is recorded first, as Accept would.
        recorded = ""
        if self.accepted is None or self.accepted[1] is not plan:
            made = self._record(heat, plan)
            if made is None:
                return
            recorded = made[1]
        assert self.accepted is not None  # recorded just now, or before
        number, _, sample = self.accepted
        try:
            # The sample as the logbook has it, the same the plan number answers.
            path = write_ticket(self.tickets_dir, heat, plan, self.book, datetime.now(),
                                sample=sample, plan_number=number, risk=self.current_risk)
        except OSError as exc:
            self.notify(f"{exc.filename}: {exc.strerror}", title="Ticket not written", severity="error")
            return
        except InputError as exc:
            self.notify(str(exc), title="Ticket not written", severity="error")
            return
        # One line: a toast shows a line break as a control character.
        said = ([recorded] if recorded else []) + [str(path)]
        if self.book.settings.ticket_print_command:
            said.append(print_ticket(path, self.book.settings.ticket_print_command))
        self.notify("; ".join(said), title="Ticket written")

    def action_add_element(self) -> None:
        from meltfix.tui.screens.prompt import BACKED_OUT, PromptDialog

        grid = self.query_one(AnalysisGrid)

        def parse(text: str) -> str:
            symbol = normalise_symbol(text, "screen", "element")
            if symbol == "Fe":
                raise InputError("screen", "element", "iron is the balance and has no cell")
            if symbol in grid.symbols:
                raise InputError("screen", "element", f"{symbol} already has a cell")
            return symbol

        async def added(symbol: object) -> None:
            if symbol is BACKED_OUT:
                return
            await self._set_rows(self.query_one(HeatForm).grade, grid.texts(), frozenset({str(symbol)}))
            grid.cell(str(symbol)).focus()

        self.app.push_screen(PromptDialog("Add an element", "Element symbol (e.g. Al, N, Ti)", "", parse), added)

    async def action_revert(self) -> None:
        await self._show_heat(self.opened)
        self.notify(f"Back to heat {self.opened.heat_id} as opened", title="Revert")


def _cell_texts(source: Heat | SpectroSample) -> dict[str, str]:
    """Grid texts for the analysis of a heat or a spectrometer sample."""
    analysis = source.analysis
    return {s: cell_text(s, pct, s in analysis.below_limit) for s, pct in analysis.pct.items()}


def _typed(inputs: HeatInputs, field_id: str) -> str | None:
    """The text ``inputs`` hold for the field of that id (None: not one of them)."""
    if field_id.startswith("cell-"):
        return inputs.cells.get(field_id.removeprefix("cell-"))
    return {"bath": inputs.bath_text, "capacity": inputs.capacity_text, "temperature": inputs.temperature_text}.get(field_id)


def _filled(texts: Mapping[str, str]) -> dict[str, str]:
    return {symbol: text.strip() for symbol, text in texts.items() if text.strip()}


def _summary(errors: Mapping[str, str]) -> str:
    (key, reason), *rest = errors.items()
    name = _FIELD_NAMES.get(key, key.removeprefix("analysis."))
    more = f" (and {len(rest)} more)" if rest else ""
    return f"{name}: {reason}{more}"


def _demo_folder(name: str) -> Path:
    try:
        folder = demo_dir() / name
    except FileNotFoundError:
        return Path.cwd()
    return folder if folder.is_dir() else Path.cwd()
