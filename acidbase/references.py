"""The one bibliography: citation key -> Citation.

Every formula, constant, tolerance and reference interval in the library names
one or more keys from this table, beside the code that uses it, and every
finding carries its citations as these objects.  ``evidence`` says how well the
project has seen the source:

* ``seen``      the value was read in the cited source or a standards document;
* ``secondary`` read only in a secondary copy that attributes it to the source;
* ``memory``    from memory, unconfirmed ("value from memory");
* ``design``    our own choice, argued in docs/methods.md;
* ``practice``  common practice, no source.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass


@dataclass(frozen=True)
class Citation:
    key: str
    authors: str
    title: str
    source: str
    year: int | None
    evidence: str = "seen"
    note: str = ""

    def short(self) -> str:
        """Author-year form: "Figge et al. 1998", "Kassirer & Bleich 1965"."""
        year = f" {self.year}" if self.year else ""
        people = [a.strip() for a in self.authors.split(",") if a.strip()]
        if self.evidence in ("practice", "design"):
            return f"{self.authors}{year}"

        def surname(person: str) -> str:
            head, _, tail = person.rpartition(" ")
            return head if head and tail.isupper() and len(tail) <= 3 else person

        surnames = [surname(p) for p in people]
        if any(p == "et al." for p in people) or len(people) > 2:
            return f"{surnames[0]} et al.{year}"
        if len(people) == 1:
            return f"{surnames[0]}{year}"
        if len(people) == 2:
            return f"{surnames[0]} & {surnames[1]}{year}"
        return f"{surnames[0]} et al.{year}"

    def full(self) -> str:
        year = f" ({self.year})" if self.year else ""
        note = f" [{self.evidence}{': ' + self.note if self.note else ''}]"
        return f"{self.authors}{year}. {self.title}. {self.source}.{note}"

    def as_dict(self) -> dict[str, object]:
        return asdict(self)


_ALL = [
    Citation("clsi_c46", "CLSI",
             "Blood Gas and pH Analysis and Related Measurements; Approved Guideline, 2nd ed. (C46-A2)",
             "Clinical and Laboratory Standards Institute, Wayne PA (chairholder D'Orazio P)", 2009,
             "secondary", "equations read in reproductions of NCCLS C46-A (2001): HCO3 = 0.0307 pCO2 10^(pH-6.105); "
             "SBE = HCO3 - 24.8 + 16.2 (pH - 7.40)"),
    Citation("kassirer_bleich_1965", "Kassirer JP, Bleich HL",
             "Rapid estimation of plasma carbon dioxide tension from pH and total carbon dioxide content",
             "N Engl J Med 272:1067-1068", 1965, "secondary", "volume and pages from memory"),
    Citation("clia_2024", "Centers for Medicare & Medicaid Services",
             "CLIA Proficiency Testing Regulations Related to Analytes and Acceptable Performance "
             "(final rule CMS-3355-F); 42 CFR 493.931 acceptance limits",
             "Federal Register 87(131):41194-41242; effective 11 July 2024", 2022, "secondary",
             "limits table read in a third-party copy; verify against the eCFR text"),
    Citation("chittamma_2008", "Chittamma A, Vanavanan S",
             "Comparative study of calculated and measured total carbon dioxide",
             "Clin Chem Lab Med 46:15-17, doi:10.1515/CCLM.2008.005", 2008),
    Citation("kumar_2017", "Kumar BV",
             "Comparison of measured serum total carbon dioxide with calculated bicarbonate "
             "calculated from arterial blood gas analysis",
             "Indian J Med Biochem 21:76-80, doi:10.5005/jp-journals-10054-0025", 2017),
    Citation("kim_2015", "Kim Y, Massie L, Murata GH, Tzamaloukas AH",
             "Discrepancy between measured serum total carbon dioxide content and bicarbonate "
             "concentration calculated from arterial blood gases",
             "Cureus 7:e398, doi:10.7759/cureus.398", 2015),
    Citation("albert_1967", "Albert MS, Dell RB, Winters RW",
             "Quantitative displacement of acid-base equilibrium in metabolic acidosis",
             "Ann Intern Med 66:312-322", 1967, "secondary",
             "the 1.5 x HCO3 + 8 +/- 2 form (Winter's formula) from derived tables; pages from memory"),
    Citation("narins_emmett_1980", "Narins RG, Emmett M",
             "Simple and mixed acid-base disorders: a practical approach",
             "Medicine (Baltimore) 59:161-186", 1980, "secondary"),
    Citation("berend_2014", "Berend K, de Vries APJ, Gans ROB",
             "Physiological approach to assessment of acid-base disturbances",
             "N Engl J Med 371:1434-1445, doi:10.1056/NEJMra1003327", 2014, "secondary",
             "compensation slopes read in a summary citing the article"),
    Citation("kidney360_2022", "Kidney360 review (authors not recorded in our notes)",
             "Expected compensation rules, Table 3",
             "Kidney360 3(8):1458-1466, doi:10.34067/KID.0008102021", 2022, "seen",
             "metabolic alkalosis band +/- 5 mmHg"),
    Citation("schlichtig_1998", "Schlichtig R, Grogono AW, Severinghaus JW",
             "Human PaCO2 and standard base excess compensation for acid-base imbalance",
             "Crit Care Med 26:1173-1179", 1998, "secondary",
             "equations read in secondary teaching text; agree with memory"),
    Citation("figge_1998", "Figge J, Jabor A, Kazda A, Fencl V",
             "Anion gap and hypoalbuminemia", "Crit Care Med 26:1807-1810", 1998, "seen",
             "0.25 mmol/L per g/L of albumin; reference albumin 44 g/L from memory"),
    Citation("klaestrup_2011", "Klaestrup E, Trydal T, Pedersen JF, Larsen JM, Lundbye-Christensen S, "
             "Kristensen SR",
             "Reference intervals and age and gender dependency for arterial blood gases and "
             "electrolytes in adults", "Clin Chem Lab Med 49:1495-1500", 2011, "seen",
             "co-author list from memory"),
    Citation("winter_1990", "Winter SD, Pearson JR, Gabow PA, Schultz AL, Lepoff RB",
             "The fall of the serum anion gap", "Arch Intern Med 150:311-313", 1990),
    Citation("kraut_madias_2007", "Kraut JA, Madias NE",
             "Serum anion gap: its uses and limitations in clinical medicine",
             "Clin J Am Soc Nephrol 2:162-174", 2007),
    Citation("rastegar_2007", "Rastegar A",
             "Use of the delta AG/delta HCO3- ratio in the diagnosis of mixed acid-base disorders",
             "J Am Soc Nephrol 18:2429-2431, doi:10.1681/ASN.2006121408", 2007),
    Citation("wrenn_1990", "Wrenn K", "The delta (delta) gap: an approach to mixed acid-base disorders",
             "Ann Emerg Med 19:1310-1313", 1990, "memory",
             "citation from memory; formula and +/- 6 band read in secondary text"),
    Citation("gabow_1980", "Gabow PA, Kaehny WD, Fennessey PV, Goodman SI, Gross PA, Schrier RW",
             "Diagnostic importance of an increased serum anion gap",
             "N Engl J Med 303:854-858", 1980, "secondary",
             "as cited in secondary reviews: gaps above 30 were usually an identified organic "
             "acidosis, while about 29 % of gaps of 20-29 had neither lactic nor keto-acidosis; "
             "the paper itself not read"),
    Citation("figge_fencl_1992", "Figge J, Mydosh T, Fencl V",
             "Serum proteins and acid-base equilibria: a follow-up",
             "J Lab Clin Med 120:713-719", 1992, "secondary",
             "albumin and phosphate charge terms as printed in a CJASN definitions table"),
    Citation("kellum_2000", "Kellum JA", "Determinants of blood pH in health and disease",
             "Crit Care 4:6-14, doi:10.1186/cc644", 2000, "secondary"),
    Citation("story_2016", "Story DA", "Stewart acid-base: a simplified bedside approach",
             "Anesth Analg 123:511-515", 2016, "secondary",
             "bedside constants (Na - Cl - 35; 0.25 x (42 - albumin); 1 - lactate) read in a secondary page"),
    Citation("plos_2013", "PLoS One acid-base study (authors not recorded in our notes)",
             "Strong ion gap and apparent SID thresholds in ICU patients",
             "PLoS One, doi:10.1371/journal.pone.0056635", 2013, "seen",
             "SIG > 8 mmol/L used as the acidosis threshold"),
    Citation("lynd_2008", "Lynd LD, Richardson KJ, Purssell RA, et al.",
             "An evaluation of the osmole gap as a screening test for toxic alcohol poisoning",
             "BMC Emerg Med 8:5", 2008, "seen", "SI form 2 Na + urea + glucose; title from memory"),
    Citation("merck_alveolar", "Merck Manual Professional",
             "Equations for calculating alveolar oxygen pressure and alveolar-to-arterial oxygen gradient",
             "Merck Manual Professional Version (table)", None, "seen",
             "PH2O 47 mmHg, R 0.8; normal A-a typically < 20 mmHg, rising with age and FiO2"),
    Citation("aa_age_rule", "Common practice, no source", "Age-expected A-a gradient = age/4 + 4 mmHg",
             "widely quoted bedside rule (origin not identified; valid on room air only)", None,
             "practice"),
    Citation("berlin_2012", "ARDS Definition Task Force",
             "Acute respiratory distress syndrome: the Berlin definition",
             "JAMA 307:2526-2533, doi:10.1001/jama.2012.5669 (Ranieri VM et al.)", 2012),
    Citation("aarc_2013", "Davis MD, Walsh BK, Sittig SE, Restrepo RD",
             "AARC Clinical Practice Guideline: Blood Gas Analysis and Hemoximetry: 2013",
             "Respir Care 58:1694-1703", 2013, "seen",
             "venous pO2 is not a substitute for PaO2"),
    Citation("kelly_2010", "Kelly AM",
             "Review article: Can venous blood gas analysis replace arterial in emergency medical care",
             "Emerg Med Australas 22:493-498, doi:10.1111/j.1742-6723.2010.01344.x", 2010, "seen",
             "arterial - venous: pH 0.035, pCO2 -5.7 mmHg (limits of agreement up to +/- 20), HCO3 -1.41"),
    Citation("byrne_2014", "Byrne AL, Bennett M, Chatterji R, Symons R, Pace NL, Thomas PS",
             "Peripheral venous and arterial blood gas analysis in adults: are they comparable? "
             "A systematic review and meta-analysis", "Respirology 19:168-175", 2014),
    Citation("baird_2013", "Baird G", "Preanalytical considerations in blood gas analysis",
             "Biochem Med 23:19-27, doi:10.11613/BM.2013.005", 2013),
    Citation("cuhadar_2022", "Cuhadar S, et al.",
             "Stability of blood gas parameters at room temperature (delayed analysis)",
             "Biochem Med 32:020708", 2022, "seen", "title paraphrased from our notes"),
    Citation("nunn_1965", "Nunn JF, Bergman NA, Bunatyan A, Coleman AJ",
             "Temperature coefficients for PCO2 and PO2 of blood in vitro",
             "J Appl Physiol 20:23-26", 1965, "secondary", "pCO2 factor 10^(0.019 dT); authors from memory"),
    Citation("severinghaus_1979", "Severinghaus JW",
             "Simple, accurate equations for human blood O2 dissociation computations",
             "J Appl Physiol 46:599-602", 1979, "memory",
             "pO2 temperature factor constants read in secondary material"),
    Citation("rosenthal_1948", "Rosenthal TB", "The effect of temperature on the pH of blood and plasma in vitro",
             "J Biol Chem 173:25-30", 1948, "memory",
             "pH coefficient -0.0147 + 0.0065 (pH - 7.40) per degC read in secondary material"),
    Citation("iowa_critical", "University of Iowa Department of Pathology",
             "Laboratory services handbook: blood gas critical values",
             "University of Iowa Health Care (web handbook)", None, "seen",
             "adult critical calls pH < 7.20 or > 7.60; pCO2 < 20 or > 70 mmHg; pO2 < 40 mmHg"),
    Citation("life_limits", "Common practice, no source",
             "pH 6.8 to 7.8 ([H+] 16 to 160 nmol/L) as the range traditionally compatible with life",
             "traditional teaching; survivals outside it are reported", None, "practice"),
    Citation("park_2012", "Park SH, Kim SY, Lee W, Chun S, Min WK",
             "New decision criteria for selecting delta check methods based on the ratio of the "
             "delta difference to the width of the reference range can be generally applicable "
             "for each clinical chemistry test item",
             "Ann Lab Med 32:345-354, doi:10.3343/alm.2012.32.5.345", 2012, "secondary",
             "the delta-difference method; title from memory"),
    Citation("randell_2019", "Randell EW, Yenice S", "Delta checks in the clinical laboratory",
             "Crit Rev Clin Lab Sci, doi:10.1080/10408363.2018.1540536", 2019, "secondary",
             "title from memory"),
    Citation("owasp_csv", "OWASP Foundation", "CSV Injection; ASVS requirement 1.2.10",
             "OWASP Community pages and Application Security Verification Standard", None),
    Citation("dekker_1971", "Dekker TJ",
             "A floating-point technique for extending the available precision",
             "Numerische Mathematik 18:224-242", 1971, "secondary",
             "the error-free product used to round derived values for CSV output; title and "
             "pages from memory"),
    Citation("hl7_0078", "Health Level Seven International",
             "HL7 Version 2 table 0078, interpretation codes (abnormal flags)",
             "HL7 v2.x standard", None, "secondary"),
    Citation("fhir_quantity", "Health Level Seven International",
             "FHIR R4 datatype Quantity, element comparator (<, <=, >=, >)",
             "https://hl7.org/fhir/R4/datatypes.html#Quantity", None),
    Citation("ucum", "Regenstrief Institute", "The Unified Code for Units of Measure (UCUM)",
             "https://ucum.org", None),
    Citation("loinc", "Regenstrief Institute", "LOINC: Logical Observation Identifiers Names and Codes",
             "https://loinc.org", None),
    Citation("abbassi_ghanavati_2009", "Abbassi-Ghanavati M, Greer LG, Cunningham FG",
             "Pregnancy and laboratory studies: a reference table for clinicians",
             "Obstet Gynecol 114:1326-1331", 2009, "memory",
             "title and authors seen; third-trimester arterial values (pH 7.41-7.53, pCO2 25-33 "
             "mmHg, HCO3 16-22 mmol/L) and pages from memory: verify against the table"),
    Citation("hankins_1996", "Hankins GDV, Clark SL, Harvey CJ, Uckan EM, Cotton D, Van Hook JW",
             "Third-trimester arterial blood gas and acid base values in normal pregnancy at "
             "moderate altitude", "Obstet Gynecol 88:347-350, doi:10.1016/0029-7844(96)00210-4",
             1996, "seen", "means at 36-38 weeks, n = 10: pH 7.46, PaCO2 26.6 mmHg, HCO3 18.2"),
    Citation("riley_1949", "Riley RL, Cournand A",
             "'Ideal' alveolar air and the analysis of ventilation-perfusion relationships in "
             "the lungs", "J Appl Physiol 1:825-847", 1949, "memory",
             "citation from memory; the full form PAO2 = FiO2 (PB - PH2O) - PaCO2 (FiO2 + "
             "(1 - FiO2)/R) read in secondary encyclopaedic pages"),
    Citation("icao_atmosphere", "International Organization for Standardization",
             "Standard Atmosphere (ISO 2533), identical to the ICAO standard atmosphere",
             "ISO 2533:1975", 1975, "memory",
             "pressure at 1,000 m 89.87 kPa (674.1 mmHg), value from memory"),
    Citation("acidbase_design", "acidbase project", "Design choice argued in docs/methods.md",
             "this project's documentation", None, "design"),
    Citation("malk_pco2_ceiling", "Common practice, no source",
             "Respiratory compensation for metabolic alkalosis rarely raises pCO2 above about "
             "55 mm[Hg]",
             "teaching tables quote 55 to 60 mm[Hg]; seen only in secondary teaching pages, "
             "the primary source not identified", None, "practice"),
    Citation("delta_bands", "Common practice, no source",
             "Delta ratio bands < 0.4, 0.4-0.8, 0.8-2, > 2",
             "widely copied teaching bands; see the cautions of Rastegar 2007", None, "practice"),
]

CITATIONS: dict[str, Citation] = {c.key: c for c in _ALL}


def cite(*keys: str) -> tuple[Citation, ...]:
    """The citations for ``keys``; an unknown key is a programming error."""
    return tuple(CITATIONS[k] for k in keys)
