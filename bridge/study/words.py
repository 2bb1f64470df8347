"""Fixed wording of the validation study, kept apart from the builder so the command line loads it cheaply."""

from __future__ import annotations

from trueband.funcs.cautions import CAUTION  # the one general caution, shared by every way in

__all__ = ["CAUTION", "NOT_COMPUTABLE", "IMPACT_Z_WORDS", "EXTRA_SELECTIONS_WORDS", "FLIP_WORDS",
           "SMALL_NUMBERS_WORDS", "RATIO_INTERVAL_WORDS", "REFERENCE_BY_RATE", "POOLING_REFUSED", "STAGES_CAUTION"]

#: What a study cell shows, before the reason, when its figure cannot be computed from the data.
NOT_COMPUTABLE = "not computable: "

# ---------------------------------------------------------------- adverse impact that stands up (issue 17)

#: How the Impact sheet words z (two-sided; the case-law convention is common practice, not a rule).
IMPACT_Z_WORDS = (
    "z is the gap between the two selection rates in standard deviations (standard errors of the gap if the "
    "rates were equal), two-sided; US courts have often treated a gap of more than two or three standard "
    "deviations as more than chance (common practice in US case law, after Castaneda v. Partida, 430 U.S. 482 "
    "(1977), and Hazelwood School District v. United States, 433 U.S. 299 (1977), which used a binomial test of "
    "this kind; the footnotes with the phrase, 430 U.S. at 496 n.17 and 433 U.S. at 308 n.14, are cited from "
    "memory; see Meier, P., Sacks, J. & Zabell, S. L. (1984). What happened in Hazelwood: statistics, employment "
    "discrimination, and the 80% rule. American Bar Foundation Research Journal 9, 139-186). It is a "
    "convention, not a legal test.")

#: The extra selections to reach four-fifths, in the study's own words.
EXTRA_SELECTIONS_WORDS = (
    "Extra selections to reach four-fifths: the fewest more people of the group who would have had to be "
    "selected, everyone else's counts unchanged, for the group's selection rate to reach four-fifths of the "
    "reference group's (the rule of thumb of the Uniform Guidelines, 29 CFR 1607.4(D)). A small number says "
    "the four-fifths verdict rests on a few people; the rule's verdicts are unstable with small groups "
    "(Roth, P. L., Bobko, P. & Switzer, F. S. (2006). Modeling the behavior of the 4/5ths rule for determining "
    "adverse impact: reasons for caution. Journal of Applied Psychology 91, 507-522).")

#: The flip count, in the study's own words.
FLIP_WORDS = (
    "Selections that flip the exact test: how many of the group's selections would have to change for "
    "Fisher's exact test to give the other verdict at the 0.05 level (added when the gap is significant now, "
    "removed when it is not). Morris, S. B. & Lobsenz, R. E. (2000). Significance tests and confidence "
    "intervals for the adverse impact ratio. Personnel Psychology 53, 89-111.")

#: The small-numbers caution with its thresholds and sources.
SMALL_NUMBERS_WORDS = (
    "Small numbers: 'yes' when either group has fewer than 30 applicants (common practice; the Uniform "
    "Guidelines, 29 CFR 1607.4(D), warn of differences 'based on small numbers' without a figure) or when "
    "fewer than 5 selections or rejections would be expected in a group if both had the pooled rate "
    "(Cochran, W. G. (1954). Biometrics 10, 417-451). Then rely on Fisher's exact p, not on z, and read "
    "the four-fifths verdict with caution.")

#: The impact ratio's interval.
RATIO_INTERVAL_WORDS = (
    "The impact ratio's interval is the log method for a ratio of two independent proportions (Morris & "
    "Lobsenz, 2000; Katz et al., 1978): an interval that lies wholly below 0.80 says more than the ratio alone; "
    "one that spans 0.80 says the data cannot tell. The odds ratio of selection is the group's odds of being "
    "selected over the reference group's.")

#: The reference group of a demographic column when none is given.
REFERENCE_BY_RATE = "(the group with the highest selection rate at the cut: the default)"
#: Beside the reference cell after an edit (live: the cell's formula compares the group's rate with the highest).
REFERENCE_CHOSEN = "(chosen here; the default is the group with the highest selection rate at the cut)"
#: Beside the reference cell when the setup named the group, and after an edit ("... gave " & the group).
REFERENCE_GIVEN = "(as given in the setup)"
REFERENCE_EDITED = "(chosen here; the setup gave "

#: Pooling over strata when the odds ratios differ.
POOLING_REFUSED = (
    "The odds ratios differ between strata (Breslow–Day p below 0.05): one pooled figure is not supported. The "
    "aggregate can even point the other way from every stratum (Simpson's paradox), so read the strata below, "
    "not a pooled headline.")

#: The stages caution.
STAGES_CAUTION = (
    "An acceptable bottom line does not excuse a stage with adverse impact: each component of a selection "
    "process is examined on its own (Connecticut v. Teal, 457 U.S. 440 (1982); 29 CFR 1607.4(C)).")

#: The reference group is one live choice: the Impact sheet's cell, read by every other impact sheet.
LIVE_REFERENCE_WORDS = (
    "The reference group of each demographic column is the one in the Impact sheet's 'Reference group' cell "
    "(by default the group with the highest selection rate at the cut when the study was built). Edit that cell "
    "and recalculate: the Impact, Strata, Cuts, Stages and Groups sheets and the Summary all compare with the "
    "group named there.")
__all__ += ["LIVE_REFERENCE_WORDS", "REFERENCE_CHOSEN", "REFERENCE_GIVEN", "REFERENCE_EDITED"]

# ---------------------------------------------------------------- fairness, item bias and combined predictors

__all__ += ["FAIRNESS_CAUTION", "FAIRNESS_READING", "DIF_CAUTION", "DIF_SIZES", "COMBINED_CAUTION"]

#: Above the Fairness sheet's figures (Aguinis, Culpepper & Pierce 2010, J. Applied Psychology 95, 648-680).
FAIRNESS_CAUTION = (
    "These tests have little power in samples of the size of most local studies (Aguinis, Culpepper & Pierce "
    "2010): a slope or intercept difference that is not significant here does not show that the score predicts "
    "alike for the groups, only that this sample cannot tell. Read the lines, their intervals and the gap at the "
    "cut, not the p values alone; differential prediction is one piece of fairness evidence, not a legal finding.")

#: Below the lines: how the step-down tests are read (Lautenschlager & Mendoza 1986).
FAIRNESS_READING = (
    "Reading the steps: first the slopes; when they differ, the lines cross and the gap at the cut is the figure "
    "to read. When the slopes do not differ detectably, the intercept test asks whether one group's line lies "
    "above the other's. A positive gap means the common line predicts a higher criterion for that group's people "
    "at the cut than their own line does (over-prediction); a negative gap, under-prediction. The criterion "
    "itself may be measured unfairly: these tests take it as given.")

#: Above the DIF sheet's figures.
DIF_CAUTION = (
    "A DIF flag says that people of two groups with the same total score answer an item differently more often "
    "than chance explains. It is a reason to have the item's content reviewed, not a finding that the item is "
    "biased; an item without a flag is not thereby shown to be fair, since these tests have little power in "
    "small groups.")

#: The group sizes the DIF sheet states (Zwick 2012, ETS RR-12-08, reviews the sizes used in practice).
DIF_SIZES = (
    "Group sizes: the study compares a group only when it has at least {minimum} people with every item answered "
    "(and so does the reference group). Operational DIF programmes use a few hundred people per group or more "
    "(Zwick 2012); below that the categories are rough and a C or B item deserves review rather than removal.")

#: Above the Combined sheet's figures.
COMBINED_CAUTION = (
    "Figures for the predictors combined rest on the people who have every predictor's score and a criterion "
    "value. Regression weights fitted in one sample predict less well in the next (the cross-validated R² "
    "estimates how much less); the composite's subgroup difference and impact ratio assume normal scores with "
    "equal spread in the groups and are indicators, not a prediction of any actual selection.")

# ---------------------------------------------------------------- the Summary's fairness and DIF lines (pred)

#: The reading of one group's step-down tests (Lautenschlager & Mendoza 1986), put together live on the Fairness
#: sheet and linked from the Summary: "slopes differ (p = 0.012 < 0.05): ...". The words never claim the absence
#: of bias: a test that finds no difference in a small sample cannot show there is none (Aguinis, Culpepper &
#: Pierce 2010).
SLOPES_DIFFER = ("slopes differ", "the group's line crosses the reference group's; read the gap at the cut")
INTERCEPTS_DIFFER = ("intercepts differ", "the slopes do not differ detectably, but one group's line lies above "
                                          "the other's; read the gap at the cut")
NO_DIFFERENCE = "no difference detected at this sample size"
NOT_ABSENCE = "this does not show the absence of bias"
__all__ += ["SLOPES_DIFFER", "INTERCEPTS_DIFFER", "NO_DIFFERENCE", "NOT_ABSENCE"]

# ---------------------------------------------------------------- the cut-score evidence (Cut score, Standard
# setting and Content sheets)

#: Above the figures of the Cut score sheet.
CUT_SCORE_CAUTION = (
    "These figures describe how precisely the test sorts people at the cut; they are statistical indicators "
    "under stated models, not legal findings. They do not show that the cut is job-related or that it is set "
    "at the right level: that rests on the standard-setting record and the validity evidence.")

#: Beside the two models of decision accuracy.
MODELS_NOTE = (
    "Headline: the beta-binomial model (Huynh 1976; Hanson & Brennan 1990), suited to number-correct scores on "
    "right/wrong items. Quick screen: the bivariate-normal approximation (Peng & Subkoviak 1980), which needs only "
    "the mean, SD and reliability but treats the scores as continuous and unbounded; where the two differ, "
    "report the beta-binomial figure.")

#: Below the sliding band.
SLIDING_BAND_CAUTION = (
    "A sliding band starts at the highest score still in contention; its floor is that score minus the band "
    "width. As the top scorers are chosen the top, and with it the floor, moves down. Choosing within a band "
    "by anything other than the score is a policy decision, not a neutral one: preferring a group within a band "
    "can itself be challenged, and in the US adjusting scores or cut-offs by race, colour, religion, sex or "
    "national origin is unlawful (Civil Rights Act of 1991, section 106, 42 U.S.C. 2000e-2(l)).")

#: On the Standard setting sheet.
STANDARD_SETTING_CAUTION = (
    "The cuts below are what each method's arithmetic gives from the judges' ratings; a method does not make a "
    "cut defensible by itself. The record must show who the judges were, how they were trained, what they were "
    "told about the minimally competent candidate and why this cut was chosen (Uniform Guidelines, 29 CFR "
    "1607.5(H) and 1607.15(B)).")

#: The marked place for the reasons only a person can give.
RATIONALE_PLACE = ("RATIONALE (to be written by the person responsible, not by trueband): why this method, "
                   "these judges and this cut; what the SEM adjustment, if any, is meant to achieve.")

#: On the Content sheet.
CONTENT_CAUTION = (
    "The content validity ratio shows how many subject-matter experts rated an item essential to the job; it "
    "is evidence about the items' content, not about how well the scores predict performance, and it rests on "
    "a job analysis the ratings must be linked to. A small panel cannot reach the critical value at all.")


# ---------------------------------------------------------------- what the numbers do not support

#: The Summary's line above the utility figures when the observed validity's interval includes zero (a live
#: formula shows it only then).
VALIDITY_NOT_ESTABLISHED = ("Local validity is not established: the observed validity's interval includes 0, so "
                            "the figures below are conditional on a validity these data do not establish.")
__all__ += ["VALIDITY_NOT_ESTABLISHED"]

# ---------------------------------------------------------------- validity, utility, retest (issue 20)

#: Below the corrected validities on the Validity sheet.
CORRECTED_LIMITS_NOTE = (
    "Intervals of the corrected validities: the observed validity's interval limits corrected the same way "
    "(each correction rises with r, so the corrected limits bound the corrected value), with the reliabilities "
    "and SDs taken as fixed, so they leave out the uncertainty of those inputs and are too narrow by that much "
    "(Hunter & Schmidt 2004, Methods of Meta-Analysis, ch. 3, from memory).")

#: The rule for showing the indirect range-restriction correction, on the Validity sheet and in the docs.
INDIRECT_RULE = (
    "Indirect correction shown only where plausible: its model (Hunter, Schmidt & Le 2006; Le & Schmidt 2006) "
    "takes the test's error variance to be the same among applicants and in the restricted group, which implies "
    "the restricted group's reliability shown above. The correction is shown only when that implied reliability "
    "is above 0 and not below the lower confidence limit of the restricted group's own alpha; otherwise the "
    "data contradict the model (selection directly on this test does that) and the correction, which divides r "
    "by the square root of the implied reliability, would overstate the validity. The rule is this tool's, "
    "built on the model's stated assumption; it is not printed in those papers.")

#: The restricted group's own reliability cannot be computed (no items).
NO_OWN_RELIABILITY = ("the restricted group's own reliability needs item columns, so the reliability the "
                      "correction implies cannot be checked")
INDIRECT_NOT_POSITIVE = ("not computable: the reliability among the restricted group that the correction implies "
                         "is 0 or below, so its model does not fit these data")
INDIRECT_IMPLAUSIBLE = ("not computable: the reliability among the restricted group that the correction implies is "
                        "below the lower confidence limit of the group's own alpha, so its model does not fit "
                        "these data (see the note below)")
__all__ += ["CORRECTED_LIMITS_NOTE", "INDIRECT_RULE", "NO_OWN_RELIABILITY", "INDIRECT_NOT_POSITIVE",
            "INDIRECT_IMPLAUSIBLE"]

#: On the Utility sheet: which validity the figures use, and why.
UTILITY_VALIDITY_NOTE = (
    "Validity used: the operational validity (the observed r corrected for criterion unreliability and for direct "
    "range restriction), the validity of the test's observed scores among applicants, as utility analysis uses it "
    "(Schmidt, Hunter, McKenzie & Muldrow 1979; Schmidt & Hunter 1998, from memory). Success is a threshold on the "
    "observed criterion, against which the validity corrected for range restriction only is the matching one: the "
    "row 'for comparison' shows the success rate with that validity, so the spread between the two choices is "
    "seen. "
    "Where the validity's interval includes 0, every figure here is conditional on a validity the data do not "
    "establish.")

#: On the Utility sheet: what the base rate is.
BASE_RATE_NOTE = (
    "Base rate: by default the share of the hires (people with a criterion value) who reach the success "
    "threshold, which is not the share among all applicants that Taylor–Russell assumes (Taylor & Russell 1939): "
    "hires were selected, so their share is usually higher. If you know the applicant base rate, give it on the "
    "Setup sheet ('applicant base rate', or --applicant-base-rate) and the figures use it.")
__all__ += ["UTILITY_VALIDITY_NOTE", "BASE_RATE_NOTE"]

#: On the Reliability sheet, shown by a live formula when the retesters are a selected group.
RETEST_SELECTED = ("Caution: the retesters are a selected group, so their test–retest correlation is restricted "
                   "in range (too low as the applicants' reliability) and their mean gain includes regression "
                   "toward the mean, not only practice.")

#: Below the retest rows: when the caution shows.
RETEST_RULE = (
    "The caution shows when at least 80% of the retesters scored below the cut at the first sitting, or when their "
    "first-sitting mean lies at least 0.5 SD of all applicants' scores from all applicants' mean (this tool's "
    "thresholds; half an SD is a medium difference, Cohen 1988). People retested because they failed regress "
    "toward the mean at the second sitting even with no practice (Campbell & Kenny 1999), and their narrow range "
    "lowers the correlation.")
__all__ += ["RETEST_SELECTED", "RETEST_RULE"]
# ---------------------------------------------------------------- the Bands sheet (issue 19: bands, sliding band)

#: Beside the Bands rows, above the sliding band.
BANDS_SIDE_NOTE = (
    "Fixed bands (column Band): scores within one band width of a band's top score are treated alike. Sliding "
    "band: the band starts at the highest score still in contention and its floor (BAND_FLOOR) is that score "
    "minus the band width; when everyone at the top score has been chosen, the band slides down to the next "
    "score. The band width is the confidence level's z × SD × √(2(1 − reliability)), the standard error of a "
    "difference between two scores.")
#: On the Cut score sheet, where the sliding band was: where it is now.
SLIDING_BAND_ON_BANDS = ("The sliding band from the top score, with its caution, is on the Bands sheet, beside the "
                         "applicants' bands.")
__all__ += ["BANDS_SIDE_NOTE", "SLIDING_BAND_ON_BANDS"]

# ---------------------------------------------------------------- printing (issue 20)

#: The Summary's line on how its numbers are computed: true of the study and of a ``recalc --values`` copy of it.
FORMULAS_OR_VALUES = (
    "Every number is a formula: click it to see how it was computed. In a copy written by trueband recalc --values "
    "the figures of trueband's functions are fixed values instead, which do not follow edits of their inputs "
    "(a notice on each sheet says so; trueband restore puts the formulas back). The sheets Reliability, Items, "
    "Raters, Validity, Bands, Impact and Utility hold the detail; Notes lists the methods and references.")
__all__ += ["FORMULAS_OR_VALUES"]


# ---------------------------------------------------------------- issue 17's open points (Strata), issue 20 (print)

#: Strata: why the exact conditional p is not computed, around the live count of possible tables (the sheet's
#: formula puts the count between the two parts; ``{limit}``: the most the test enumerates).
EXACT_TOO_LARGE = ("the strata are too large for the exact conditional test: ",
                   " possible tables, more than the {limit:,} it enumerates at most; read the "
                   "Cochran–Mantel–Haenszel p instead")
__all__ += ["EXACT_TOO_LARGE"]

# ---------------------------------------------------------------- fewer per-applicant formulas (issues 17 and 18)

#: Beside the Validity sheet's scatter when it plots a subset: which people it shows (every figure uses all).
CHART_SUBSET = ("The chart plots the first {shown:,} of the {total:,} people with a score and a criterion value, in "
                "the order of the data (a scatter of more points is unreadable and slow to draw); every figure on "
                "this sheet uses all {total:,}.")
__all__ += ["CHART_SUBSET"]
