"""Screens of the terminal interface. Results screens (compare, plan, gaps, memo) plug in here
as modules defining CompareScreen, PlanScreen, GapsScreen and MemoScreen; see vetting.tui.app."""
