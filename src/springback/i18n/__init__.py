"""Languages: gettext catalogues and CLDR formatting, catalogue upkeep, language checks and
reading ease."""
