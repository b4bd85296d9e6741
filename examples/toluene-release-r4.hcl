# Release method for refined toluene TR-99.8 (product code OKS-T998),
# Okkerby Solvents, Tarnmouth works. An invented scenario for the demo.
# Purity and trace impurities by GC-FID, normalized area % with relative
# response factors; water comes from a separate Karl Fischer test and reaches
# the run through the data file's metadata.
#
# Revision 4 (the change-impact demo): the largest unknown impurity is
# tightened from 0.030 % to 0.010 %; everything else is as in revision 3.

pipeline "toluene-release" {
  revision    = 4
  description = "Refined toluene TR-99.8: purity and impurities by GC-FID, normalized area % with RRF"
}

input {
  signal_unit = "pA"
}

smooth {
  method = "savitzky-golay"
  window = 11
  order  = 2
}

baseline {
  method    = "asls"
  lambda    = 1e8
  asymmetry = 0.001
}

detect {
  min_snr = 10
  ignore {          # unretained (air) peak
    from = 0
    to   = 1.5
  }
}

integrate {
  constants = "pharmacopoeia"
}

identify {
  component "toluene" {
    rt     = 6.40
    window = 0.08
    main   = true
  }
  component "benzene" {
    rt     = 3.62
    window = 0.05
    rrf    = 1.01
  }
  component "ethylbenzene" {
    rt     = 9.10
    window = 0.05
    rrf    = 0.98
  }
  component "p-xylene" {
    rt     = 9.48
    window = 0.05
    rrf    = 0.97
  }
  component "m-xylene" {
    rt     = 9.70
    window = 0.05
    rrf    = 0.97
  }
  component "o-xylene" {
    rt     = 10.42
    window = 0.05
    rrf    = 0.97
  }
}

quantify {
  method              = "normalized"
  unknown_rrf         = 1.00
  reporting_threshold = 0.005
}

limit "Purity (toluene)" {
  value = component.toluene.percent
  min   = 99.80
  unit  = "% (normalized area)"
  when  = meta.sample_type == "sample"
}

limit "Benzene" {
  value = component.benzene.percent
  max   = 0.010
  unit  = "% (normalized area)"
  when  = meta.sample_type == "sample"
}

limit "Ethylbenzene" {
  value = component.ethylbenzene.percent
  max   = 0.050
  unit  = "% (normalized area)"
  when  = meta.sample_type == "sample"
}

limit "Largest unknown" {
  value = largest_unknown
  max   = 0.010
  unit  = "% (normalized area)"
  when  = meta.sample_type == "sample"
}

limit "Total impurities" {
  value = total_impurities
  max   = 0.20
  unit  = "% (normalized area)"
  when  = meta.sample_type == "sample"
}

limit "Water (Karl Fischer)" {
  value = meta.water_kf_pct
  max   = 0.030
  unit  = "% (m/m)"
  when  = meta.sample_type == "sample"
}

limit "Blank: peaks above S/N 10" {
  value = peak_count
  max   = 0
  when  = meta.sample_type == "blank"
}

report {
  formats     = ["json", "xlsx", "pdf"]
  site        = "Okkerby Solvents — Tarnmouth works, Quality Control laboratory"
  address     = ["4 Quay Road, Tarnmouth", "(an invented company for the lotgate demo)"]
  logo        = "okkerby-logo.png"
  product     = "Refined toluene"
  grade       = "TR-99.8 (product code OKS-T998)"
  paper       = "A4"
  signatures  = ["Analysed by (QC analyst)", "Reviewed by (QC supervisor)", "Released by (QA)"]
  safety_note = "Toluene: keep containers closed and away from ignition sources; the works' permit-to-work rules apply in the GC laboratory."
}
