"""The workbench names a loop with poles on the stability boundary as such (issue 11 item 1)."""

import sympy


def test_a_gain_with_poles_on_the_axis_is_shown_on_the_boundary(workbench):
    # The served reference plant is the companion of s³ + 6s² + 5s + 1 (reference case 1); K = [5, −4, 0]
    # gives s³ + 6s² + s + 6 = (s + 6)(s² + 1) (sympy factor below): poles ±j exactly on the axis.
    s = sympy.symbols("s")
    assert sympy.factor(s**3 + 6 * s**2 + s + 6) == (s + 6) * (s**2 + 1)
    workbench.set_gain_text("[[5, -4, 0]]")
    header = workbench.page.locator(".gb-header")
    workbench.wait_for(lambda: "on the boundary" in header.inner_text(), "the header to say 'on the boundary'")
    workbench.screenshot("boundary_verdict")
    # the entry badges agree: no empty interval such as "−4 < k₁₂ < −4" beside them
    badges = workbench.page.locator(".gb-interval-text")
    workbench.wait_for(lambda: badges.count() == 3 and all("on the boundary now" in badges.nth(i).inner_text()
                                                            for i in range(3)), "three on-the-boundary badges")
    assert not any("< −4 or" in badges.nth(i).inner_text() or "< 0 or" in badges.nth(i).inner_text() for i in range(3))
    workbench.open_tab("Poles")
    pole_rows = workbench.page.locator('tr.gb-pole-row[data-kind="closed"]')
    workbench.wait_for(lambda: sum("on the boundary" in pole_rows.nth(i).inner_text()
                                   for i in range(pole_rows.count())) == 2, "two pole rows on the boundary")
    assert "stable" not in header.inner_text().replace("on the boundary", "")
    workbench.screenshot("boundary_verdict_poles")
