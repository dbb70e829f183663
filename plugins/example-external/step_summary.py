#!/usr/bin/env python3
"""Example external metric module for cohortpress: daily step summary.

It speaks the cohortpress module protocol 1.0 (see plugins/PROTOCOL.md) and uses only the Python 3
standard library, so it runs wherever python3 does. For each participant it reports, from the steps
logged in activity.csv over the reporting period:

- mean_daily_steps: mean steps per day, over the days that have steps logged (a day without a log is
  unknown, not zero);
- step_days: how many days have steps logged;
- days_at_goal_percent: share of those days reaching the step goal (setting `step_goal`);
- weekly_mean_steps: mean steps per logged day, week by week (weeks start on Monday; the first
  point of a period that starts mid-week is dated on the period's first day).

Several activity rows on one day are added up. Data after the period's end or after the run's as-of
date are not used.
"""

import json
import math
import sys
from datetime import date, timedelta

PROTOCOL = "1.0"

# The step goal default of 7,000 steps a day is `common practice` for a daily walking goal in
# adult programs; it is a setting, not a clinical threshold.
DEFAULT_STEP_GOAL = 7000

SPEC = {
    "id": "steps",
    "version": "0.1.0",
    "description": (
        "Daily step summary from the steps logged in activity.csv: mean steps per logged day, "
        "days with steps logged, the share of logged days reaching a step goal, and a weekly "
        "series. Days without a step log are treated as unknown, not as zero. An example of an "
        "external module written in Python."
    ),
    "settings": [
        {
            "name": "step_goal",
            "kind": "integer",
            "default": DEFAULT_STEP_GOAL,
            "unit": "steps/d",
            "choices": [],
            "min": 1000,
            "max": 30000,
            "description": (
                "Daily step goal; 7,000 steps a day is common practice, not a clinical threshold."
            ),
        }
    ],
    "outputs": [
        {
            "name": "mean_daily_steps",
            "kind": "scalar",
            "unit": "steps/d",
            "description": "Mean steps per day over the days with steps logged in the period.",
        },
        {
            "name": "step_days",
            "kind": "scalar",
            "unit": "d",
            "description": "Days in the period with steps logged.",
        },
        {
            "name": "days_at_goal_percent",
            "kind": "scalar",
            "unit": "%",
            "description": "Share of the days with steps logged that reached the step goal.",
        },
        {
            "name": "weekly_mean_steps",
            "kind": "series",
            "unit": "steps/d",
            "description": "Mean steps per logged day, week by week (weeks start on Monday).",
        },
    ],
    "requires": [],
}


class ModuleFailure(Exception):
    """A problem to report to the host as an `error` message."""


def send(message):
    """Writes one protocol message as one line of JSON."""
    sys.stdout.write(json.dumps(message, separators=(",", ":"), ensure_ascii=False) + "\n")


def read_messages(raw):
    """Parses standard input: one JSON object per non-empty line."""
    messages = []
    for number, line in enumerate(raw.splitlines(), start=1):
        if not line.strip():
            continue
        try:
            message = json.loads(line)
        except json.JSONDecodeError as e:
            raise ModuleFailure(f"input line {number} is not JSON: {e}") from None
        if not isinstance(message, dict) or "type" not in message:
            raise ModuleFailure(f"input line {number} is not a protocol message")
        messages.append(message)
    return messages


def parse_day(text, what):
    try:
        return date.fromisoformat(text)
    except (TypeError, ValueError):
        raise ModuleFailure(f"{what} is not a date (YYYY-MM-DD): {text!r}") from None


def scalar(name, value, unit, label):
    return {"name": name, "value": value, "unit": unit, "label": label}


def compute(context, participant):
    """Computes the step summary for one participant; returns a ModuleOutput object."""
    period = context["period"]
    first = parse_day(period["from"], "period.from")
    last = min(parse_day(period["to"], "period.to"), parse_day(context["as_of"], "as_of"))
    goal = context.get("settings", {}).get("step_goal", DEFAULT_STEP_GOAL)
    if isinstance(goal, bool) or not isinstance(goal, (int, float)) or goal <= 0:
        raise ModuleFailure(f"setting step_goal must be a positive number, found {goal!r}")

    daily = {}
    for entry in participant.get("activity", []):
        steps = entry.get("steps")
        if steps is None:
            continue
        day = parse_day(entry.get("date"), "an activity date")
        if isinstance(steps, bool) or not isinstance(steps, (int, float)) or not math.isfinite(
            steps
        ) or steps < 0:
            raise ModuleFailure(
                f"activity on {day.isoformat()} has steps {steps!r}; expected a number of 0 or more"
            )
        if first <= day <= last:
            daily[day] = daily.get(day, 0) + steps

    days = sorted(daily)
    output = {"scalars": [], "texts": [], "series": [], "tables": [], "flags": []}
    mean = sum(daily[d] for d in days) / len(days) if days else None
    at_goal = 100.0 * sum(1 for d in days if daily[d] >= goal) / len(days) if days else None
    output["scalars"].append(scalar("mean_daily_steps", mean, "steps/d", "Mean daily steps"))
    output["scalars"].append(scalar("step_days", len(days), "d", "Days with steps logged"))
    output["scalars"].append(
        scalar("days_at_goal_percent", at_goal, "%", f"Days at {goal:,} steps or more")
    )

    weeks = {}
    for d in days:
        start = max(d - timedelta(days=d.weekday()), first)
        weeks.setdefault(start, []).append(daily[d])
    points = [
        {"date": start.isoformat(), "value": sum(values) / len(values)}
        for start, values in sorted(weeks.items())
    ]
    output["series"].append(
        {
            "name": "weekly_mean_steps",
            "unit": "steps/d",
            "step": "weekly",
            "label": "Mean daily steps by week",
            "points": points,
        }
    )
    if not days:
        output["flags"].append(
            {
                "code": "insufficient_data",
                "severity": "info",
                "message": "No steps were logged in this period, so there is no step summary.",
            }
        )
    return output


def main():
    # Host-side text is UTF-8 whatever the locale says.
    raw = sys.stdin.buffer.read().decode("utf-8", errors="replace")
    sys.stdout.reconfigure(encoding="utf-8")
    # The host refuses a different major version itself; the module always answers hello first.
    send({"type": "hello", "protocol": PROTOCOL, "spec": SPEC})
    try:
        messages = read_messages(raw)
        if not messages or messages[0].get("type") != "hello":
            raise ModuleFailure("expected a hello message first")
        rest = messages[1:]
        if not rest:
            return 0  # only asked to describe itself
        request = rest[0]
        if request.get("type") != "compute" or len(rest) > 1:
            raise ModuleFailure(f"expected one compute message, found {request.get('type')!r}")
        output = compute(request["context"], request["participant"])
        send({"type": "result", "output": output})
    except ModuleFailure as e:
        send({"type": "error", "message": str(e)})
    except (KeyError, TypeError, ValueError, AttributeError) as e:
        # Malformed input: say what broke rather than dying with a traceback.
        send({"type": "error", "message": f"malformed request ({type(e).__name__}: {e})"})
    return 0


if __name__ == "__main__":
    sys.exit(main())
