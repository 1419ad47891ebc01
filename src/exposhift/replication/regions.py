"""Named groups of countries for the gap map's ``--region`` filter.

The built-in regions are the five continental regions of the UN M49 standard (United Nations
Statistics Division, "Standard country or area codes for statistical use"), written out here
from memory of that standard with ISO 3166-1 alpha-3 codes; check them before relying on a
borderline case. Antarctica (ATA) belongs to no M49 region. Taiwan (TWN) is not listed in M49
and is placed in Asia here. A committee can add or replace regions in the ``[regions]`` table of
``evidence/replication.toml`` (see :mod:`exposhift.replication.settings`).
"""

from __future__ import annotations

_M49 = {
    "africa": """
        DZA EGY LBY MAR SDN TUN ESH
        BDI COM DJI ERI ETH KEN MDG MWI MUS MYT MOZ REU RWA SYC SOM SSD UGA TZA ZMB ZWE IOT ATF
        AGO CMR CAF TCD COG COD GNQ GAB STP
        BWA SWZ LSO NAM ZAF
        BEN BFA CPV CIV GMB GHA GIN GNB LBR MLI MRT NER NGA SHN SEN SLE TGO
    """,
    "americas": """
        AIA ATG ABW BHS BRB BES VGB CYM CUB CUW DMA DOM GRD GLP HTI JAM MTQ MSR PRI BLM KNA LCA
        MAF VCT SXM TTO TCA VIR
        BLZ CRI SLV GTM HND MEX NIC PAN
        ARG BOL BVT BRA CHL COL ECU FLK GUF GUY PRY PER SGS SUR URY VEN
        BMU CAN GRL SPM USA
    """,
    "asia": """
        KAZ KGZ TJK TKM UZB
        CHN HKG MAC PRK JPN MNG KOR TWN
        BRN KHM IDN LAO MYS MMR PHL SGP THA TLS VNM
        AFG BGD BTN IND IRN MDV NPL PAK LKA
        ARM AZE BHR CYP GEO IRQ ISR JOR KWT LBN OMN QAT SAU PSE SYR TUR ARE YEM
    """,
    "europe": """
        BLR BGR CZE HUN POL MDA ROU RUS SVK UKR
        ALA DNK EST FRO FIN GGY ISL IRL IMN JEY LVA LTU NOR SJM SWE GBR
        ALB AND BIH HRV GIB GRC VAT ITA MLT MNE MKD PRT SMR SRB SVN ESP
        AUT BEL FRA DEU LIE LUX MCO NLD CHE
    """,
    "oceania": """
        AUS NZL CXR CCK HMD NFK
        FJI NCL PNG SLB VUT
        GUM KIR MHL FSM NRU MNP PLW UMI
        ASM COK PYF NIU PCN WSM TKL TON TUV WLF
    """,
}

#: region name -> ISO 3166-1 alpha-3 codes (UN M49 continental regions)
M49_REGIONS: dict[str, tuple[str, ...]] = {
    name: tuple(sorted(codes.split())) for name, codes in _M49.items()
}
