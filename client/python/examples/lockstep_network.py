#!/usr/bin/python3
"""A small network simulator that uses fadeloop as its power controller.

Three cells on a line (0, 1000, 2000 m), users moving along it, each
served by its nearest cell. The simulator owns the radio: positions, its
own path loss (3GPP TR 25.942 macro model, L = 128.1 + 37.6 log10(d/km)
dB), the interference sum and the block CRC outcomes (an invented link
curve). fadeloop owns the control over one Lockstep stream: every slot the
simulator sends each user's measured SIR and the CRC results of blocks that
ended, and fadeloop answers with each user's transmit power for the NEXT
slot. Users go silent now and then (DTX: inactive_users), one call ends
(leave_users) and one starts (join_users) mid-run.

At the end it checks that the users converged: mean |SIR - target| over
the second half within --max-sir-error-db, and the block error ratio near
the outer loop's 0.1 target. Exit 0 when both hold, 1 when not, 2 on an
RPC error.

    /usr/bin/python3 client/python/examples/lockstep_network.py --server 127.0.0.1:50051

Simulated settings do not replace the operator's radio planning, the
regulatory limits on transmit power and exposure, or licensed practice.
"""
import argparse
import math
import os
import queue
import random
import sys

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), ".."))

import grpc  # noqa: E402

from fadeloop.v1 import lockstep_pb2, lockstep_pb2_grpc, scenario_pb2  # noqa: E402

SLOT_RATE_HZ = 1500
PROCESSING_GAIN = 3.84e6 / 12.2e3  # chip rate / bit rate
NOISE_DBM = -103.0  # thermal noise in 3.84 MHz, 5 dB noise figure
BLOCK_SLOTS = 15
DTX_PROB = 0.05
CELLS_X = (0.0, 1000.0, 2000.0)


def path_loss_db(d):
    """3GPP TR 25.942 macro-cell path loss (memory); 30 m antenna height."""
    return 128.1 + 37.6 * math.log10(math.hypot(d, 30.0) / 1000.0)


def block_error_prob(sir_db):
    """The simulator's own link curve (invented): logistic, 50 % at 4 dB."""
    return 1.0 / (1.0 + math.exp(2.0 * (sir_db - 4.0)))


def mw(dbm):
    return 10.0 ** (dbm / 10.0)


def user_settings():
    return lockstep_pb2.LockstepUser(
        inner_loop=scenario_pb2.InnerLoop(
            mode=scenario_pb2.INNER_MODE_CLOSED_LOOP,
            command=scenario_pb2.COMMAND_FIXED_STEP,
            update_rate_hz=SLOT_RATE_HZ, step_db=1, feedback_delay_slots=1,
            min_power_dbm=-50, max_power_dbm=24,
            initial_power=scenario_pb2.INITIAL_POWER_FIXED, initial_power_dbm=0),
        outer_loop=scenario_pb2.OuterLoop(
            enabled=True, bler_target=0.1, block_slots=BLOCK_SLOTS, up_step_db=0.5,
            min_target_db=-5, max_target_db=15, initial_target_db=6))


class User:
    def __init__(self, rng):
        self.x = 100 + 1800 * rng.random()
        self.v = (2 * rng.random() - 1) * 30  # m/s
        self.pow_dbm = 0.0
        self.active = True
        self.gone = False
        self.blk_sum = 0.0
        self.blk_n = 0


class Stream:
    """One Lockstep stream: send a request, wait for its reply."""

    def __init__(self, stub, config):
        self._q = queue.Queue()
        self._q.put(lockstep_pb2.LockstepRequest(config=config))
        self._replies = stub.Lockstep(iter(self._q.get, None))

    def step(self, slot_msg):
        self._q.put(lockstep_pb2.LockstepRequest(slot=slot_msg))
        return next(self._replies)

    def close(self):
        self._q.put(None)  # half-close: the service ends the stream cleanly
        for _ in self._replies:
            pass


def run(stub, slots, seed):
    rng = random.Random(seed)
    cfg = lockstep_pb2.LockstepConfig(
        seed=seed, reply_on_slot_error=True,
        receiver=scenario_pb2.Receiver(sir_estimation_error_db=1))  # the service adds a 1 dB estimation error
    users = []
    for _ in range(12):
        users.append(User(rng))
        cfg.users.append(user_settings())
    st = Stream(stub, cfg)
    dt = 1.0 / SLOT_RATE_HZ
    err_abs, n_err, blocks, block_errs = 0.0, 0, 0, 0
    refused = []
    targets = []
    for slot in range(slots):
        msg = lockstep_pb2.LockstepSlot(slot=slot)
        for i, u in enumerate(users):
            u.x += u.v * dt
            if u.x < 50 or u.x > 1950:
                u.v = -u.v
            u.active = not u.gone and rng.random() >= DTX_PROB
            if not u.active and not u.gone:
                msg.inactive_users.append(i)
        sir = []
        for u in users:
            if not u.active:
                sir.append(0.0)  # ignored by the service
                continue
            cx = min(CELLS_X, key=lambda c: abs(u.x - c))
            interf = sum(mw(o.pow_dbm - path_loss_db(o.x - cx)) for o in users if o is not u and o.active)
            s = PROCESSING_GAIN * mw(u.pow_dbm - path_loss_db(u.x - cx)) / (mw(NOISE_DBM) + interf)
            sir.append(max(-100.0, min(100.0, 10 * math.log10(s))))
        msg.sir_db.extend(sir)
        for i, u in enumerate(users):
            if not u.active:
                continue
            u.blk_sum += 10 ** (sir[i] / 10)
            u.blk_n += 1
            if slot % BLOCK_SLOTS == BLOCK_SLOTS - 1:
                e = rng.random() < block_error_prob(10 * math.log10(u.blk_sum / u.blk_n))
                msg.blocks.add(user=i, error=e)
                u.blk_sum, u.blk_n = 0.0, 0
                if slot >= slots // 2:
                    blocks += 1
                    block_errs += e
        if slot == slots // 3:  # a call ends, another starts
            msg.leave_users.append(0)
            msg.join_users.append(user_settings())
        if slot == 10 and users[0].active:  # a bad message on purpose
            bad = lockstep_pb2.LockstepSlot()
            bad.CopyFrom(msg)
            bad.sir_db[0] = float("nan")
            r = st.step(bad)
            if r.HasField("slot_error"):
                refused.append(r.slot_error.violations[0].field)
        r = st.step(msg)
        if r.HasField("slot_error"):
            raise RuntimeError("slot %d refused: %s" % (slot, r.slot_error))
        targets = list(r.target_db)
        if slot >= slots // 2:
            for i, u in enumerate(users):
                if u.active:
                    err_abs += abs(sir[i] - targets[i])
                    n_err += 1
        if msg.leave_users:
            users[0].gone = True
            users.append(User(rng))
        for i, u in enumerate(users):
            u.pow_dbm = r.tx_power_dbm[i]  # the power of the next slot
    st.close()
    live = [targets[i] for i, u in enumerate(users) if not u.gone]
    return {
        "users": len(users),
        "slots": slots,
        "sir_error_db": err_abs / n_err,
        "blocks": blocks,
        "bler": block_errs / blocks,
        "mean_target_db": sum(live) / len(live),
        "refused": refused,
    }


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--server", default="127.0.0.1:50051")
    ap.add_argument("--slots", type=int, default=4500, help="slots to simulate (1500 per second)")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--max-sir-error-db", type=float, default=2.0,
                    help="accepted mean |SIR - target| (1 dB step limit cycle plus 1 dB estimation error give about 1 to 1.4)")
    ap.add_argument("--bler-band", type=float, default=0.04, help="accepted |BLER - 0.1|")
    a = ap.parse_args()
    with grpc.insecure_channel(a.server) as ch:
        try:
            grpc.channel_ready_future(ch).result(timeout=10)
            s = run(lockstep_pb2_grpc.LoopServiceStub(ch), a.slots, a.seed)
        except grpc.RpcError as e:
            print("lockstep_network: %s: %s" % (e.code().name, e.details()), file=sys.stderr)
            return 2
    print("users            %d" % s["users"])
    print("slots            %d" % s["slots"])
    print("SIR error        %.2f dB (mean |SIR - target|, second half)" % s["sir_error_db"])
    print("BLER             %.3f over %d blocks (target 0.1)" % (s["bler"], s["blocks"]))
    print("mean target      %.2f dB" % s["mean_target_db"])
    print("refused slots    %d (%s)" % (len(s["refused"]), ", ".join(s["refused"])))
    # The one wording of the caution (loop.Caution in the Go module).
    print("Simulated settings do not replace the operator's radio planning, "
          "the regulatory limits on transmit power and exposure, or licensed practice.")
    ok = s["sir_error_db"] <= a.max_sir_error_db and abs(s["bler"] - 0.1) <= a.bler_band
    print("converged        %s" % ("yes" if ok else "NO"))
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
