"""A station simulator: a Modbus TCP server that behaves like the PLC plus the tightening
controller, for demos and tests on one machine. All values it makes up are demo data.

Generated mode: it presents a serial (from a list, or ``PC-000001`` upwards) with a new
``unit_sequence``; whenever the enable coil is on, the "operator" pulls the trigger after a
short random delay, ``tool_running`` is on for the run time, then a result (OK with
probability ``ok_rate``, torque and angle around their targets with Gaussian noise) is set and
``result_sequence`` counts up; the next trigger waits until the station echoes that sequence in
``result_ack`` (or drops the enable). When the station reports the unit OK or NOK it waits a moment
and presents the next serial.

Like a PLC, it adds 1 to ``plc_liveness`` every ``liveness_period_s`` and watches the station's
heartbeat: when it has not changed for ``heartbeat_timeout_s`` (the station stopped, hung or lost
the link) the simulated tool loses power: a run in progress stops at once without a result, and
no run starts until the heartbeat counts again. Each power drop is logged and counted.

Scripted mode: station inputs from a JSON-lines file (the sample video's sidecar) are presented
at their ``t_s`` after :meth:`StationSimulator.start` (or, with ``script_waits_for_station``,
after the station's heartbeat first counts, so a simulator started before ``run`` keeps time
with the video), whatever the station does (a power drop is logged and counted, the script goes
on).
"""

from __future__ import annotations

import logging
import random
import threading
import time
from collections.abc import Sequence
from dataclasses import dataclass, replace
from typing import Self

from stationcheck.core.observations import (
    Observation,
    OperatorAck,
    Reset,
    TighteningResult,
    ToolRunning,
    UnitStarted,
)
from stationcheck.plc.address_map import AddressMap, default_address_map
from stationcheck.plc.server_host import ServerHost
from stationcheck.plc.signals import UNIT_STATUS_CODES, InputSignals

logger = logging.getLogger(__name__)

PULSE_S = 0.2  # how long acknowledge and reset bits stay on
STROBES = frozenset({"unit_sequence", "result_sequence"})


@dataclass(frozen=True)
class SimulatorSettings:
    ok_rate: float = 0.9
    seed: int | None = None
    serials: tuple[str, ...] = ()
    torque_target_nm: float = 5.0
    torque_noise_nm: float = 0.08
    angle_target_deg: float = 30.0
    angle_noise_deg: float = 2.0
    nok_torque_factor: float = 0.6  # a NOK result stops at this share of the target torque
    trigger_delay_s: tuple[float, float] = (0.1, 0.4)
    run_time_s: float = 0.5
    unit_gap_s: float = 2.0
    units: int | None = None  # stop presenting serials after this many (None: endless)
    poll_s: float = 0.005
    script_waits_for_station: bool = False  # scripted mode: t = 0 at the first heartbeat
    script_speed: float = 1.0  # scripted mode: present inputs this many times faster
    heartbeat_timeout_s: float = 0.2  # no heartbeat change this long: tool power off
    liveness_period_s: float = 0.05  # plc_liveness counts up this often (a PLC's poll period)

    def __post_init__(self) -> None:
        if self.heartbeat_timeout_s <= 0 or self.liveness_period_s <= 0:
            raise ValueError(
                "heartbeat_timeout_s and liveness_period_s must be > 0, got "
                f"{self.heartbeat_timeout_s} and {self.liveness_period_s}"
            )
        if self.script_speed <= 0:
            raise ValueError(f"script_speed must be > 0, got {self.script_speed}")
        if not 0.0 <= self.ok_rate <= 1.0:
            raise ValueError(f"ok_rate must be within 0..1, got {self.ok_rate}")
        low, high = self.trigger_delay_s
        if not 0.0 <= low <= high:
            raise ValueError(
                f"trigger_delay_s must be (low, high) with 0 <= low <= high, got "
                f"{self.trigger_delay_s}"
            )


class StationSimulator:
    def __init__(
        self,
        host: str,
        port: int,
        settings: SimulatorSettings | None = None,
        *,
        script: Sequence[Observation] = (),
        address_map: AddressMap | None = None,
        device_id: int = 1,
    ) -> None:
        self.settings = settings or SimulatorSettings()
        self.address_map = address_map or default_address_map()
        self.server = ServerHost(
            host, port, size=max(64, self.address_map.highest_address()), device_id=device_id
        )
        self.script = tuple(script)
        self.random = random.Random(self.settings.seed)
        self.inputs = InputSignals()
        self.units_presented = 0
        self.results = 0
        self._stop = threading.Event()
        self._thread: threading.Thread | None = None
        self._scan: threading.Thread | None = None
        self.error: BaseException | None = None
        self._inputs_lock = threading.RLock()
        self.tool_power = threading.Event()  # set while the station's heartbeat counts
        self.power_drops = 0
        self.liveness = 0

    @property
    def port(self) -> int:
        return self.server.port

    def start(self) -> Self:
        return self.serve().begin()

    def serve(self) -> Self:
        """Starts the server with all inputs at zero; :meth:`begin` starts the behaviour."""
        self.server.start()
        self._present(self.inputs)
        return self

    def begin(self) -> Self:
        self._scan = threading.Thread(
            target=self._guarded, args=(self._run_scan,), name="simulator-scan", daemon=True
        )
        self._scan.start()
        target = self._run_script if self.script else self._run_generated
        self._thread = threading.Thread(
            target=self._guarded, args=(target,), name="station-simulator", daemon=True
        )
        self._thread.start()
        return self

    def stop(self) -> None:
        self._stop.set()
        for thread in (self._thread, self._scan):
            if thread is not None:
                thread.join(5.0)
        self.server.stop()

    def wait(self) -> None:
        """Blocks until the simulator ends (a script ran out, or :meth:`stop`)."""
        while self._thread is not None and self._thread.is_alive():
            self._thread.join(0.2)

    def __enter__(self) -> Self:
        return self.start()

    def __exit__(self, *exc: object) -> None:
        self.stop()

    # --- station outputs as the PLC sees them ---
    def output(self, name: str) -> int:
        spec = self.address_map[name]
        return self.server.get(spec.table, spec.address)[0]

    def _present(self, inputs: InputSignals) -> None:
        words = inputs.words()
        old = self.inputs.words()
        # data first, the sequence counters (the strobes of the handshake) last
        specs = sorted(self.address_map.of("in"), key=lambda s: s.name in STROBES)
        for spec in specs:
            if words[spec.name] != old[spec.name] or inputs is self.inputs:
                self.server.set(spec.table, spec.address, words[spec.name])
        self.inputs = inputs

    def _set(self, **changes: object) -> None:
        with self._inputs_lock:  # the scan thread drops tool_running on its own
            self._present(replace(self.inputs, **changes))  # type: ignore[arg-type]

    def _guarded(self, target: object) -> None:
        try:
            target()  # type: ignore[operator]
        except BaseException as exc:
            if self._stop.is_set():
                return  # stopping: the server may already be gone
            self.error = exc
            logger.exception("the station simulator stopped")

    def _wait(self, seconds: float) -> bool:
        """False when stopped meanwhile."""
        return not self._stop.wait(max(0.0, seconds))

    # --- the PLC's scan: liveness counter and heartbeat watchdog ---
    def _run_scan(self) -> None:
        spec = self.address_map["plc_liveness"]
        timeout_s = self.settings.heartbeat_timeout_s
        heartbeat, changed_at = self.output("heartbeat"), time.monotonic()
        next_count = time.monotonic()
        while self._wait(min(self.settings.poll_s, self.settings.liveness_period_s)):
            now = time.monotonic()
            if now >= next_count:
                self.liveness = (self.liveness + 1) & 0xFFFF
                self.server.set(spec.table, spec.address, [self.liveness])
                next_count = now + self.settings.liveness_period_s
            beat = self.output("heartbeat")
            if beat != heartbeat:
                heartbeat, changed_at = beat, now
                if not self.tool_power.is_set():
                    logger.info("simulator: station heartbeat counts; tool power on")
                    self.tool_power.set()
            elif self.tool_power.is_set() and now - changed_at > timeout_s:
                self.tool_power.clear()
                self.power_drops += 1
                logger.warning(
                    "simulator: station heartbeat stopped at %d for %.0f ms; tool "
                    "power off (drop %d)",
                    beat,
                    timeout_s * 1e3,
                    self.power_drops,
                )
                if not self.script and self.inputs.tool_running:
                    self._set(tool_running=False)

    # --- generated mode ---
    def _next_serial(self) -> str:
        number = self.units_presented
        if self.settings.serials:
            return self.settings.serials[number % len(self.settings.serials)]
        return f"PC-{number + 1:06d}"

    def _new_unit(self) -> None:
        serial = self._next_serial()
        self.units_presented += 1
        logger.info("simulator: unit %s", serial)
        self._set(serial=serial, unit_sequence=(self.inputs.unit_sequence + 1) & 0xFFFF)

    def _run_generated(self) -> None:
        settings = self.settings
        self._new_unit()
        finished = {UNIT_STATUS_CODES["ok"], UNIT_STATUS_CODES["nok"]}
        while not self._stop.is_set():
            if (
                self.output("unit_status") in finished
                and self.output("unit_ack") == self.inputs.unit_sequence
            ):
                if settings.units is not None and self.units_presented >= settings.units:
                    if not self._wait(settings.poll_s):
                        return
                    continue
                if not self._wait(settings.unit_gap_s):
                    return
                self._new_unit()
                continue
            if self.output("tool_enable") and self.tool_power.is_set():
                if not self._wait(self.random.uniform(*settings.trigger_delay_s)):
                    return
                if self.output("tool_enable") and self.tool_power.is_set():
                    self._tighten()
                continue
            if not self._wait(settings.poll_s):
                return

    def _tighten(self) -> None:
        settings = self.settings
        self._set(tool_running=True)
        ends = time.monotonic() + settings.run_time_s
        while time.monotonic() < ends:
            if not self._wait(min(settings.poll_s, ends - time.monotonic())):
                return
            if not self.tool_power.is_set():
                logger.warning("simulator: the run stopped without a result (no power)")
                return
        ok = self.random.random() < settings.ok_rate
        target = settings.torque_target_nm * (1.0 if ok else settings.nok_torque_factor)
        torque = max(0.0, self.random.gauss(target, settings.torque_noise_nm))
        angle = self.random.gauss(settings.angle_target_deg, settings.angle_noise_deg)
        self.results += 1
        self._set(
            tool_running=False, result_ok=ok, torque_nm=round(torque, 2), angle_deg=round(angle, 1)
        )
        self._set(result_sequence=(self.inputs.result_sequence + 1) & 0xFFFF)
        logger.info(
            "simulator: result %d %s %.2f N*m %.1f deg",
            self.results,
            "OK" if ok else "NOK",
            torque,
            angle,
        )
        # the operator pulls the trigger again only once the station took the result in
        while (
            self.output("result_ack") != self.inputs.result_sequence
            and self.output("tool_enable")
            and not self._stop.is_set()
        ):
            self._wait(self.settings.poll_s)

    # --- scripted mode ---
    def _run_script(self) -> None:
        if self.settings.script_waits_for_station:
            logger.info("waiting for the station's heartbeat before presenting the script")
            while self.output("heartbeat") == 0:
                if not self._wait(self.settings.poll_s):
                    return
        started = time.monotonic()
        speed = self.settings.script_speed
        pulses: list[tuple[float, str]] = []
        for observation in self.script:
            while True:
                now = (time.monotonic() - started) * speed
                for due, name in [p for p in pulses if p[0] <= now]:
                    self._set(**{name: False})
                    pulses.remove((due, name))
                if now >= observation.t_s:
                    break
                next_due = min([observation.t_s, *(due for due, _ in pulses)])
                if not self._wait(max(next_due - now, 0.0) / speed):
                    return
            self._apply(observation, pulses, (time.monotonic() - started) * speed)

    def _apply(self, observation: Observation, pulses: list[tuple[float, str]], now: float) -> None:
        if isinstance(observation, UnitStarted):
            self.units_presented += 1
            self._set(
                serial=observation.serial,
                rework=observation.rework,
                unit_sequence=(self.inputs.unit_sequence + 1) & 0xFFFF,
            )
        elif isinstance(observation, ToolRunning):
            self._set(tool_running=observation.on)
        elif isinstance(observation, TighteningResult):
            self.results += 1
            self._set(
                result_ok=observation.ok,
                torque_nm=observation.torque_nm or 0.0,
                angle_deg=observation.angle_deg or 0.0,
            )
            self._set(result_sequence=(self.inputs.result_sequence + 1) & 0xFFFF)
        elif isinstance(observation, OperatorAck):
            self._set(operator_ack=True)
            pulses.append((now + PULSE_S, "operator_ack"))
        elif isinstance(observation, Reset):
            self._set(reset=True)
            pulses.append((now + PULSE_S, "reset"))
        else:
            logger.info("simulator: %s inputs are not presented over Modbus", observation.kind)
