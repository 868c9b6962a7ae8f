"""Build the example and template workbooks from code, so they can be rebuilt and reviewed.

Run from the repository root:  python scripts/build_books.py
The data are invented for the demo (seeded), in a scenario of our own: a regional
distributor's monthly delivery cost against the stops made and the distance driven.
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import numpy as np
import xlsxwriter

ROOT = Path(__file__).resolve().parents[1]
#: Fixed document date so a rebuild gives the same bytes.
CREATED = dt.datetime(2026, 1, 1)


def build_delivery_costs(path: Path) -> None:
    """Example: 36 months of delivery cost, stops and km, and next quarter's plan."""
    rng = np.random.default_rng(20261201)
    months = 36
    stops = np.round(rng.uniform(820, 1480, months))
    km = np.round(stops * rng.uniform(8.5, 11.5, months) + rng.normal(0, 600, months))
    cost = np.round(5200 + 2.35 * stops + 0.41 * km + rng.normal(0, 380, months), 2)

    wb = xlsxwriter.Workbook(str(path))
    wb.set_properties({"created": CREATED})
    bold = wb.add_format({"bold": True})
    money = wb.add_format({"num_format": "#,##0.00"})
    ws = wb.add_worksheet("Deliveries")
    ws.write_row(0, 0, ["month", "delivery cost", "stops", "km driven"], bold)
    for i in range(months):
        year, month = divmod(i, 12)
        ws.write_string(i + 1, 0, f"{2023 + year}-{month + 1:02d}")
        ws.write_number(i + 1, 1, float(cost[i]), money)
        ws.write_number(i + 1, 2, float(stops[i]))
        ws.write_number(i + 1, 3, float(km[i]))
    # month 14: the tracker failed, km not recorded -- it must be listed as left out
    ws.write_string(14, 3, "n/a")
    ws.set_column(0, 0, 10)
    ws.set_column(1, 3, 14)
    ws.write(0, 5, "Append each month's row below the last one; refresh to update the fits.")

    plan = wb.add_worksheet("Plan")
    plan.write_row(0, 0, ["quarter month", "stops", "km driven"], bold)
    for i, (s, k) in enumerate([(1210, 12300), (1350, 13800), (1520, 16100)]):
        plan.write_string(i + 1, 0, f"2026-{i + 1:02d}")
        plan.write_number(i + 1, 1, s)
        plan.write_number(i + 1, 2, k)
    plan.write_row(5, 0, ["setting", "value"], bold)
    plan.write_row(6, 0, ["method", "least_squares"])
    plan.write_row(7, 0, ["intercept", "yes"])
    plan.set_column(0, 2, 14)

    # model "route": cost on stops and km, whole columns so appended months are picked up
    wb.define_name("sf_route_y", "=Deliveries!$B:$B")
    wb.define_name("sf_route_x", "=Deliveries!$C:$D")
    wb.define_name("sf_route_new", "=Plan!$B$1:$C$4")
    wb.define_name("sf_route_opts", "=Plan!$A$6:$B$8")
    wb.define_name("sf_route_key", "=Deliveries!$A:$A")  # the month beside each row
    wb.define_name("sf_route_newkey", "=Plan!$A$1:$A$4")
    # model "bykm": cost on km alone, a straight line with the slope identity check
    wb.define_name("sf_bykm_y", "=Deliveries!$B$1:$B$37")
    wb.define_name("sf_bykm_x", "=Deliveries!$D$1:$D$37")
    wb.define_name("sf_bykm_key", "=Deliveries!$A$1:$A$37")
    wb.close()


def build_template(path: Path) -> None:
    """Template: one declared, empty model over whole columns, ready to be filled in."""
    wb = xlsxwriter.Workbook(str(path))
    wb.set_properties({"created": CREATED})
    bold = wb.add_format({"bold": True})
    note = wb.add_format({"italic": True, "font_color": "#555555"})
    ws = wb.add_worksheet("Data")
    ws.write_row(0, 0, ["response", "driver 1", "driver 2"], bold)
    ws.set_column(0, 2, 14)
    ws.write(0, 4, "Rename the headers, type or paste your rows from row 2 down, then run "
             "sheetfit refresh on this file.", note)
    ws.write(1, 4, "Delete the 'driver 2' column from sf_model_x (Formulas > Names) for one "
             "driver.", note)
    st = wb.add_worksheet("Settings")
    st.write_row(0, 0, ["setting", "value"], bold)
    st.write_row(1, 0, ["method", "least_squares"])
    st.write_row(2, 0, ["intercept", "yes"])
    st.write_row(3, 0, ["degree", 1])
    st.set_column(0, 1, 14)
    wb.define_name("sf_model_y", "=Data!$A:$A")
    wb.define_name("sf_model_x", "=Data!$B:$C")
    wb.define_name("sf_model_opts", "=Settings!$A$1:$B$4")
    wb.close()


def build_field_jobs(path: Path) -> None:
    """Example: past field-service jobs; estimate a new job from similar past jobs."""
    rng = np.random.default_rng(20261202)
    n = 60
    hours = rng.integers(2, 41, n).astype(float)
    km = rng.integers(5, 160, n).astype(float)
    cost = np.round(180 + 42 * hours + 1.6 * km + rng.normal(0, 90, n) * np.sqrt(hours), 2)
    wb = xlsxwriter.Workbook(str(path))
    wb.set_properties({"created": CREATED})
    bold = wb.add_format({"bold": True})
    ws = wb.add_worksheet("Jobs")
    ws.write_row(0, 0, ["job", "cost", "crew hours", "km to site"], bold)
    for i in range(n):
        ws.write_row(i + 1, 0, [f"J-{1001 + i}", float(cost[i]), hours[i], km[i]])
    ws.set_column(0, 3, 13)
    quotes = wb.add_worksheet("Quotes")
    quotes.write_row(0, 0, ["quote", "crew hours", "km to site"], bold)
    for i, (h, k) in enumerate([(6, 20), (18, 140), (33, 45)]):
        quotes.write_row(i + 1, 0, [f"Q-{501 + i}", float(h), float(k)])
    quotes.write_row(5, 0, ["setting", "value"], bold)
    quotes.write_row(6, 0, ["method", "neighbour_mean"])
    quotes.write_row(7, 0, ["k", "auto"])
    quotes.write_row(9, 0, ["setting", "value"], bold)
    quotes.write_row(10, 0, ["method", "strip_mean"])
    quotes.write_row(11, 0, ["width", 3])
    quotes.set_column(0, 2, 13)
    wb.define_name("sf_similar_y", "=Jobs!$B:$B")
    wb.define_name("sf_similar_x", "=Jobs!$C:$D")
    wb.define_name("sf_similar_new", "=Quotes!$B$1:$C$4")
    wb.define_name("sf_similar_opts", "=Quotes!$A$6:$B$8")
    wb.define_name("sf_similar_key", "=Jobs!$A:$A")  # job numbers
    wb.define_name("sf_similar_newkey", "=Quotes!$A$1:$A$4")  # quote numbers
    wb.define_name("sf_byhours_y", "=Jobs!$B:$B")
    wb.define_name("sf_byhours_x", "=Jobs!$C:$C")
    wb.define_name("sf_byhours_opts", "=Quotes!$A$10:$B$12")
    wb.define_name("sf_byhours_key", "=Jobs!$A:$A")
    wb.define_name("sf_byhours_new", "=Quotes!$B$1:$B$4")
    wb.define_name("sf_byhours_newkey", "=Quotes!$A$1:$A$4")
    wb.close()


def build_open_invoices(path: Path) -> None:
    """Example: which open invoices will probably be paid late, from similar past invoices."""
    rng = np.random.default_rng(20261203)
    n = 120
    amount = np.round(rng.lognormal(7.5, 0.8, n), 2)
    terms = rng.choice([14.0, 30.0, 60.0], n)
    past = np.round(rng.gamma(2.0, 4.0, n), 1)
    score = 0.25 * past + 0.00008 * amount - 0.03 * terms + rng.normal(0, 1.2, n)
    outcome = np.where(score > 1.6, "late", "on time")
    wb = xlsxwriter.Workbook(str(path))
    wb.set_properties({"created": CREATED})
    bold = wb.add_format({"bold": True})
    ws = wb.add_worksheet("Paid")
    ws.write_row(0, 0, ["invoice", "outcome", "amount", "credit days",
                        "customer avg days late"], bold)
    for i in range(n):
        ws.write_row(i + 1, 0, [f"INV-{7001 + i}", str(outcome[i]), float(amount[i]),
                                float(terms[i]), float(past[i])])
    ws.set_column(0, 4, 15)
    op = wb.add_worksheet("Open")
    op.write_row(0, 0, ["invoice", "amount", "credit days", "customer avg days late"], bold)
    for i in range(8):
        op.write_row(i + 1, 0, [f"INV-{8101 + i}", float(np.round(rng.lognormal(7.5, 0.8), 2)),
                                float(rng.choice([14.0, 30.0, 60.0])),
                                float(np.round(rng.gamma(2.0, 4.0), 1))])
    op.write_row(11, 0, ["setting", "value"], bold)
    op.write_row(12, 0, ["method", "neighbour_vote"])
    op.write_row(13, 0, ["k", 7])
    op.write_row(14, 0, ["focus", "late"])
    op.set_column(0, 3, 15)
    wb.define_name("sf_late_y", "=Paid!$B:$B")
    wb.define_name("sf_late_x", "=Paid!$C:$E")
    wb.define_name("sf_late_new", "=Open!$B$1:$D$9")
    wb.define_name("sf_late_opts", "=Open!$A$12:$B$15")
    wb.define_name("sf_late_key", "=Paid!$A:$A,Paid!$C:$C")  # invoice number and amount
    wb.define_name("sf_late_newkey", "=Open!$A$1:$B$9")
    wb.close()


def main() -> None:
    (ROOT / "example_books").mkdir(exist_ok=True)
    (ROOT / "templates").mkdir(exist_ok=True)
    build_delivery_costs(ROOT / "example_books" / "delivery_costs.xlsx")
    build_field_jobs(ROOT / "example_books" / "field_jobs.xlsx")
    build_open_invoices(ROOT / "example_books" / "open_invoices.xlsx")
    build_template(ROOT / "templates" / "cost_model_template.xlsx")
    print("wrote example_books/{delivery_costs,field_jobs,open_invoices}.xlsx and "
          "templates/cost_model_template.xlsx")


if __name__ == "__main__":
    main()
