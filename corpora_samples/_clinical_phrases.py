"""Phrase pools for the clinical corpus (invented Orlindhal General Infirmary).

Templates use the syntax of ``_grammar``: [a|b] alternatives, [?a] optional
parts and {slot} values.  Every name, place and statute is invented.
"""

SPECIALTIES = ["cardiology", "respiratory", "neurology", "gastroenterology",
               "elderly", "orthopaedics"]
SPEC_WEIGHTS = [5, 5, 5, 5, 2, 2]
SPEC_NAME = {"cardiology": "Cardiology", "respiratory": "Respiratory Medicine",
             "neurology": "Neurology", "gastroenterology": "Gastroenterology",
             "elderly": "Care of the Elderly", "orthopaedics": "Trauma and Orthopaedics"}

# ---------------------------------------------------------------------------
# Specialty material: presenting complaints, history, examination,
# investigations, management, diagnoses.
# ---------------------------------------------------------------------------
PC = {
    "cardiology": [
        "central chest tightness radiating to the left arm",
        "exertional chest pain relieved by rest",
        "palpitations [on exertion|at night|lasting several hours]",
        "worsening ankle oedema and orthopnoea",
        "a syncopal episode while climbing stairs",
        "paroxysmal nocturnal dyspnoea [for two weeks|over the last month]",
        "breathlessness on minimal exertion and [three|four]-pillow orthopnoea",
        "a fast irregular heartbeat noticed on a smartwatch",
    ],
    "respiratory": [
        "[three|five|ten] days of productive cough with green sputum",
        "increasing wheeze and breathlessness",
        "pleuritic pain on the [left|right] side",
        "haemoptysis, [a teaspoon|streaks] of blood on [two|several] occasions",
        "a COPD exacerbation despite {his} usual inhalers",
        "fever, rigors and a productive cough",
        "breathlessness and falling peak flow readings",
        "a chronic cough with copious sputum, known bronchiectasis",
    ],
    "neurology": [
        "sudden-onset [left|right]-sided limb weakness",
        "facial droop and slurred speech noticed by [a relative|a neighbour|the carer]",
        "a first generalised seizure [at work|at home|in the supermarket]",
        "a thunderclap headache with photophobia",
        "intermittent diplopia [worse in the evenings|on lateral gaze]",
        "progressive unsteadiness and ataxia",
        "numbness and tingling in both feet",
        "a resting tremor of the [left|right] hand",
        "transient dysarthria lasting [twenty minutes|an hour]",
    ],
    "gastroenterology": [
        "epigastric pain [radiating to the back|worse after meals]",
        "[two|three] episodes of haematemesis after vomiting",
        "colicky abdominal pain and vomiting",
        "rectal bleeding [with clots|mixed with stool|on wiping]",
        "melaena for [two|three] days",
        "progressive dysphagia to solids",
        "painless jaundice and dark urine",
        "abdominal distension, with ascites on examination",
        "bloody diarrhoea [six|eight|ten] times a day",
        "altered bowel habit and weight loss",
        "persistent reflux despite over-the-counter antacids",
        "pale, offensive stools suggestive of steatorrhoea",
    ],
    "elderly": [
        "a fall at home with a long lie",
        "increasing confusion over [three days|a week]",
        "reduced mobility and poor oral intake",
        "recurrent falls and postural dizziness",
    ],
    "orthopaedics": [
        "a painful swollen [left|right] wrist after a fall",
        "[left|right] hip pain and inability to weight-bear",
        "a twisting injury to the [left|right] knee playing five-a-side",
        "low back pain radiating to the [left|right] leg",
    ],
}

HISTORY = {
    "cardiology": [
        "{He} has a background of hypertension and type 2 diabetes and is an ex-smoker of [twenty|thirty|forty] pack-years.",
        "The pain came on [at rest|while gardening|walking uphill] and lasted about [twenty|forty] minutes.",
        "{He} describes palpitations as a [fluttering|thumping|racing] sensation with no clear trigger.",
        "There is a family history of premature coronary disease; {his} father died of a heart attack aged {young_age}.",
        "Exercise tolerance has fallen from [two miles|a mile|the top of the hill] to [fifty yards|one flight of stairs|the end of the garden].",
        "{He} admits to sleeping upright in a chair because of orthopnoea.",
        "Previous echo in {year} showed an ejection fraction of {ef} per cent.",
        "{He} stopped {cdrug} some months ago because of [ankle swelling|dizziness|a cough].",
        "No previous history of atrial fibrillation, although {he} recalls similar episodes [last winter|years ago].",
    ],
    "respiratory": [
        "{He} has COPD with an FEV1 of {fev1} per cent predicted on spirometry in {year}.",
        "{He} uses {rdrug} [twice daily|as needed] and has needed [two|three] courses of oral steroids this year.",
        "Still smoking [ten|fifteen|twenty|about {n}] cigarettes a day despite [advice|a referral to stop-smoking services|two previous admissions].",
        "Worked for [many years|{n} years|most of {his} life] in [a foundry|a quarry|the Lorrimouth shipyards|a bakery|a grain store], with [dust|fume|flour] exposure.",
        "Baseline exercise tolerance is about [one hundred metres|a flight of stairs|half a mile] on the flat.",
        "{He} was admitted with a similar exacerbation in {month} and discharged on home oxygen.",
        "No known asthma; childhood bronchiectasis after whooping cough.",
        "The cough has been productive of [green|yellow|rusty] sputum, with occasional haemoptysis.",
    ],
    "neurology": [
        "Symptoms began at {time} and were first noticed by {his} [partner|daughter|carer].",
        "{He} has no previous seizures, but [drinks heavily|had a head injury in {year}|has missed sleep recently|started {ndrug} in {month}|was unwell with a fever last week].",
        "The headache was maximal within [seconds|a minute|five minutes] and described as [the worst ever|'like being hit with a bat'|{pain}/10 and unlike previous headaches].",
        "{He} has a history of migraine[ with aura| since {his} teens|], but says this episode felt [different|much worse|longer than usual].",
        "The tremor is worse at rest and improves with movement; handwriting has become smaller.",
        "Witnesses describe [stiffening followed by jerking of all four limbs|a period of staring and lip-smacking], followed by a postictal drowsiness lasting [ten|thirty] minutes.",
        "{He} is right-handed and drives for a living, which has implications for {his} licence.",
        "Vision in the [left|right] field has been patchy since the event, raising the possibility of a hemianopia.",
    ],
    "gastroenterology": [
        "{He} drinks about {units} units of alcohol a week and takes [an over-the-counter anti-inflammatory|an anti-inflammatory] for back pain.",
        "There has been [five|eight|ten] kilograms of unintentional weight loss over [three|six] months.",
        "{He} has a history of peptic ulcer disease and was treated for Helicobacter pylori in {year}.",
        "Stools have been [black and tarry|dark and sticky|black] since {day}[, with {n_small2} episodes|].",
        "Food sticks [behind the sternum|at the level of the throat], and {he} now manages only soft foods.",
        "Liver function tests from the practice showed a bilirubin of {bili} and ALT of {alt}.",
        "{He} has known ulcerative colitis, previously controlled on {gdrug}.",
        "There is no family history of bowel cancer.",
        "Previous OGD in {year} showed [oesophagitis|a hiatus hernia|gastric erosions].",
    ],
    "elderly": [
        "{He} lives alone with a package of care [twice|four times] daily.",
        "{He} was found on the floor by [the carer|a neighbour|{his} son|the warden] after [an unknown period|about {n} hours|an overnight lie].",
        "Background of [mild dementia|an akinetic-rigid movement disorder|chronic kidney disease] and [osteoporosis|atrial fibrillation|hypertension].",
        "[Family|{His} daughter|{His} son|The carer] report[s|] a gradual decline in [memory|self-care|mobility] over [the last year|several months|about {n} months].",
    ],
    "orthopaedics": [
        "{He} fell onto an outstretched hand [on ice|from a stepladder|in the garden].",
        "The knee swelled [immediately|within an hour|overnight] and {he} could not [continue playing|weight-bear|straighten it].",
        "There is no [numbness|paraesthesia|weakness] in the affected limb[ and capillary refill is under 2 seconds|].",
        "{He} takes an anticoagulant for atrial fibrillation, which is relevant to surgical planning.",
    ],
}

EXAM = {
    "cardiology": [
        "HR {hr_fast} irregularly irregular, BP {bp}.",
        "JVP raised at [four|five] cm, with pitting ankle oedema to the [shins|knees].",
        "A [soft|grade 2/6|harsh] [pansystolic|ejection systolic] murmur is heard at the [apex|left sternal edge|aortic area][, radiating to the axilla|].",
        "Heart sounds normal, no murmur. Chest clear.",
        "Fine bibasal crackles consistent with pulmonary oedema.",
        "Peripheral pulses present; no signs of heart failure.",
    ],
    "respiratory": [
        "RR {rr_high}, SpO2 {spo2_low} on air, using accessory muscles.",
        "[Widespread|Scattered|Polyphonic] expiratory wheeze[ with reduced air entry at the [left|right] base|, no crackles| and prolonged expiration].",
        "Coarse crackles at the [left|right] base with bronchial breathing.",
        "Dull to percussion at the [left|right] base, in keeping with a pleural effusion.",
        "Able to complete sentences; peak flow {pef} L/min ({pef_pct} per cent of best).",
        "Temperature {temp_high}, tachycardic at {hr_fast}.",
    ],
    "neurology": [
        "Left facial droop sparing the forehead, with [mild|marked] dysarthria.",
        "Power [3/5|4/5|2/5] in the [left|right] arm and leg; reflexes brisk with an upgoing plantar.",
        "GCS {gcs}; pupils equal and reactive.",
        "Heel-shin testing shows ataxia on the [left|right]; broad-based gait.",
        "Neck stiffness present, with marked photophobia.",
        "Cranial nerves intact apart from a [left|right] sixth nerve palsy causing diplopia.",
        "Reduced sensation to pinprick in a stocking distribution.",
        "No focal neurological deficit on examination.",
    ],
    "gastroenterology": [
        "Tender in the epigastrium [without guarding|with mild guarding|on deep palpation]; bowel sounds [present|sluggish|normal].",
        "Abdomen distended with shifting dullness, consistent with [ascites|moderate ascites|tense ascites]; girth {girth} cm.",
        "Clinically jaundiced[, with scratch marks on the forearms|, sclerae yellow|; no stigmata of chronic liver disease].",
        "PR: melaena on the glove.",
        "Soft abdomen, mildly tender in the left iliac fossa.",
        "Palpable liver edge [two|three] fingerbreadths below the costal margin.",
        "HR {hr_fast}, BP {bp_low}; looks pale and clammy.",
    ],
    "elderly": [
        "Alert but disorientated to time and place; AMT {amt_score}/10.",
        "Bruising over the [left|right] hip, no shortening or rotation.",
        "Lying and standing BP {bp} and {bp_low}.",
    ],
    "orthopaedics": [
        "Dinner-fork deformity of the wrist; neurovascularly intact.",
        "Shortened and externally rotated [left|right] leg.",
        "Effusion of the knee with a positive anterior drawer test.",
        "Straight-leg raise limited to [thirty|forty-five] degrees on the [left|right].",
    ],
}

INVEST = {
    "cardiology": [
        "ECG showed [atrial fibrillation with a rate of {hr_fast}|ST depression in V4-V6|new LBBB|sinus rhythm with T-wave inversion in the lateral leads].",
        "High-sensitivity troponin {trop} ng/L rising to {trop2} ng/L at three hours.",
        "Echocardiogram: ejection fraction {ef} per cent, [moderate mitral regurgitation|dilated left ventricle|no regional wall motion abnormality].",
        "Chest X-ray: cardiomegaly with upper lobe diversion.",
        "BNP {bnp} pg/mL.",
        "Coronary angiography showed a [tight proximal LAD stenosis|two-vessel disease|chronically occluded right coronary artery].",
    ],
    "respiratory": [
        "[Chest X-ray|CXR|A chest X-ray]: [right lower lobe consolidation|hyperexpanded lung fields|a moderate left pleural effusion|no consolidation].",
        "ABG on air: pH {ph}, pCO2 {pco2} kPa, pO2 {po2} kPa.",
        "CRP {crp}, WCC {wcc}.",
        "Sputum culture grew [Haemophilus influenzae|a pseudomonas species|normal flora].",
        "Spirometry: FEV1 {fev1} per cent predicted, FEV1/FVC ratio {ratio}.",
        "CT pulmonary angiogram: [no pulmonary embolus|segmental emboli on the right|bronchiectatic changes in both lower lobes].",
    ],
    "neurology": [
        "CT head: [no haemorrhage|an established infarct in the left MCA territory|no acute intracranial abnormality].",
        "MRI brain showed [restricted diffusion in the right internal capsule|multiple white-matter lesions|no structural cause].",
        "EEG: [normal|focal slowing over the left temporal region|generalised spike-and-wave discharges].",
        "Lumbar puncture: [xanthochromia absent|opening pressure 32 cm of water|raised protein].",
        "Glucose {glucose} mmol/L on arrival.",
        "Carotid Doppler: [60|70|80] per cent stenosis of the [left|right] internal carotid artery.",
    ],
    "gastroenterology": [
        "Hb {hb_low} g/L, urea {urea}; bleeding risk score {gbs}.",
        "LFTs: bilirubin {bili}, ALT {alt}, ALP {alp}, albumin {alb}.",
        "OGD: [a bleeding duodenal ulcer, treated with clips and adrenaline|grade 2 oesophageal varices, banded|a stricture at 32 cm, biopsied|a hiatus hernia with mild oesophagitis].",
        "CT abdomen: [a mass in the head of the pancreas|a cirrhotic liver with moderate ascites|thickening of the sigmoid colon|no acute pathology].",
        "Faecal calprotectin {calpro} micrograms/g.",
        "Colonoscopy showed [continuous inflammation to the splenic flexure|a 2 cm polyp in the sigmoid, removed|diverticular disease].",
        "Ascitic tap: [neutrophils under 250|neutrophils 480, treated as spontaneous bacterial peritonitis].",
    ],
    "elderly": [
        "Urine dip[ ({time})|]: [leucocytes and nitrites positive|bland|blood +, protein trace|leucocytes ++].",
        "Sodium {na}, potassium {k}, creatinine {creat}.",
        "CT head: [age-related involutional change only|small chronic subdural on the right].",
    ],
    "orthopaedics": [
        "X-ray: [a dorsally angulated distal radius fracture|an intracapsular neck of femur fracture|no bony injury].",
        "MRI knee: [anterior cruciate ligament rupture|medial meniscal tear|bone bruising only].",
    ],
}

PLAN = {
    "cardiology": [
        "Started on {cdrug} and {cdrug2}, with rate control achieved by day {day_n}.",
        "Loaded with antiplatelets and referred for [angiography|inpatient angiography at {hosp}] as an NSTEMI[; ischaemic risk score {grace}|].",
        "Diuresed with intravenous {cdrug}, losing {kg} kg over the admission.",
        "Anticoagulation with {cdrug} discussed; CHA2DS2-VASc score {chads}.",
        "Referred to cardiac rehabilitation and the heart failure nurses.",
        "Outpatient echocardiogram and 24-hour tape requested.",
    ],
    "respiratory": [
        "Treated with {rdrug}, nebulisers and a five-day course of oral steroids.",
        "Started on {rdrug2} for a community-acquired pneumonia, CURB-65 score {curb}.",
        "Required non-invasive ventilation for [one night|two nights] for hypercapnia.",
        "Pleural aspiration performed[ on day {day_n}|] ({ml} mL [straw-coloured|blood-stained|turbid] fluid); sent for [cytology|cytology and culture|pH, protein and LDH].",
        "Inhaler technique reviewed[ by {surname_i}|] and a [written action plan|rescue pack|self-management plan] given.",
        "Referred to [pulmonary rehabilitation|the {town} breathe-easy group|community respiratory team] and [smoking cessation|the stop-smoking service][ before discharge on {date}|].",
    ],
    "neurology": [
        "Thrombolysed at {time} within the treatment window; stroke severity score improved from {sev} to {sev2}.",
        "Started on {ndrug} and advised not to drive until reviewed in the first seizure clinic.",
        "Admitted to the stroke unit for swallow assessment and secondary prevention.",
        "Referred for [urgent MRI|nerve conduction studies|a movement disorder opinion].",
        "Analgesia with {ndrug2} and a [CT angiogram|lumbar puncture] arranged.",
        "Physiotherapy and occupational therapy assessments completed before discharge.",
    ],
    "gastroenterology": [
        "Transfused [two|three] units and started on an intravenous proton-pump inhibitor.",
        "Started on {gdrug} and referred for urgent OGD.",
        "Paracentesis drained [four|six|eight] litres with albumin cover.",
        "Referred on the suspected-cancer pathway for [CT and endoscopy|ERCP|colonoscopy].",
        "Alcohol withdrawal managed with a reducing regimen; seen by the alcohol liaison team.",
        "Dietitian review for weight loss; started on {gdrug2}.",
    ],
    "elderly": [
        "Treated for a urinary infection with {odrug}; delirium settled.",
        "Falls assessment and physiotherapy; discharged with a frame.",
        "Medication review completed; {odrug} stopped.",
    ],
    "orthopaedics": [
        "Manipulated under a haematoma block and placed in a cast.",
        "Listed for hemiarthroplasty on the next trauma list.",
        "Fitted with a hinged brace; fracture clinic in one week.",
    ],
}

DIAGNOSES = {
    "cardiology": ["NSTEMI", "fast atrial fibrillation", "decompensated heart failure",
                   "unstable angina", "complete heart block", "new LBBB under investigation"],
    "respiratory": ["infective exacerbation of COPD", "community-acquired pneumonia",
                    "acute asthma", "left pleural effusion", "bronchiectasis exacerbation",
                    "pulmonary embolism"],
    "neurology": ["left MCA territory ischaemic stroke", "first unprovoked seizure",
                  "subarachnoid haemorrhage excluded", "migraine with aura",
                  "transient ischaemic attack", "peripheral neuropathy", "akinetic-rigid syndrome"],
    "gastroenterology": ["upper GI bleed secondary to duodenal ulcer", "decompensated alcohol-related liver disease",
                         "acute flare of ulcerative colitis", "oesophageal stricture",
                         "obstructive jaundice", "acute pancreatitis"],
    "elderly": ["delirium secondary to urinary infection", "mechanical fall", "postural hypotension"],
    "orthopaedics": ["distal radius fracture", "neck of femur fracture", "anterior cruciate ligament rupture"],
}

# ---------------------------------------------------------------------------
# Genre material
# ---------------------------------------------------------------------------
NURSING = [
    "{hour} Pt [settled|slept well|restless] overnight[, no complaints|, c/o {pc_short}|].",
    "{hour} Obs: HR {hr}, BP {bp}, RR {rr}, SpO2 {spo2}% on [air|2L O2|28% venturi], T {temp}. NEWS2 {news}.",
    "{hour} Dr {surname} informed re [NEWS {news}|low BP|chest pain|rising O2 requirement]; r/v [awaited|done, plan as per notes].",
    "{hour} [Regular|Evening|Morning] {drug} given as prescribed[, tolerated well|].",
    "{hour} Mobilised to [bathroom|chair|nurses' station] with [frame|stick|1 assist|2 assist].",
    "{hour} Eating and drinking [well|poorly|small amounts]; fluid chart [up to date|encouraged].",
    "{hour} Pressure areas checked[, skin intact|, sacrum red but blanching|, heels intact]. Repositioned [2|3|4]-hourly[ with {n_small2} staff|].",
    "{hour} [Family|{His} {relative}|Next of kin] [visited|phoned], updated by [nurse in charge|F1 doctor|ward sister|{surname_i}].",
    "{hour} BM {glucose}[. No action|. Hypo protocol followed|, Dr informed|, rechecked in 1 hr|, insulin given as per chart].",
    "{hour} Cannula re-sited ([L|R] [forearm|hand|ACF]) as previous one [tissued|was leaking|was > 72 hrs old].",
    "{hour} PRN {drug_prn} given for [pain|nausea|agitation] with good effect.",
    "{hour} Catheter draining [clear|concentrated] urine, {ml} ml in last [4|6|8] hrs.",
    "{hour} c/o {pc_short}. ECG done and shown to Dr {surname}.",
    "{hour} [Confused|Agitated|Disorientated] [overnight|this shift|since {time}], trying to [climb out of bed|remove cannula|leave the ward]; [bay nursed|sitter requested|family called].",
    "{hour} Awaiting [OT assessment|TTO meds|transport|package of care restart] for d/c.",
    "{hour} Bowels [open x1|open x{n_small2}, type {n_small2}|not opened x{n_small2} days, laxatives given].",
    "{hour} Falls risk assessment updated[ (score {n})|]; bed rails [in use|not appropriate|discussed with family].",
    "{hour} Reviewed by [physio|SALT|dietitian|pharmacy]; plan documented.",
    "{hour} Handed over to [night|day|evening|oncoming] staff[. No acute concerns|; nil concerns|, plan unchanged|, bay quiet|, see care plan].",
    "{hour} Pain score {pain}/10, analgesia given.",
]
NURSING_SPEC = {
    "cardiology": ["{hour} Telemetry shows AF rate {hr_fast}, Dr aware.", "{hour} Daily weight {weight} kg, fluid restriction 1.5 L.",
                   "{hour} c/o central chest tightness, GTN x1 with relief."],
    "respiratory": ["{hour} Nebs given, wheeze improved.", "{hour} Sats dropped to {spo2_low}% on air, O2 increased.",
                    "{hour} Sputum sample sent[. Productive cough, green|; cough productive of [yellow|green|blood-streaked] sputum|]."],
    "neurology": ["{hour} Neuro obs: GCS {gcs}, pupils PEARL.", "{hour} Failed bedside swallow screen, NBM, SALT referral.",
                  "{hour} Witnessed seizure approx 2 mins, postictal, recovery position."],
    "gastroenterology": ["{hour} [Vomited|Vomiting] x{n_small2}, [coffee-ground in appearance|bilious|small volume].", "{hour} c/o abdominal pain, [PRN analgesia given|Dr informed|settled with heat pack].", "{hour} Melaena x1, Dr informed, bloods sent.",
                         "{hour} Abdo girth {girth} cm. Drain output {ml} ml."],
    "elderly": ["{hour} Wandering on ward, redirected.", "{hour} Sitter in place overnight."],
    "orthopaedics": ["{hour} Pin sites clean.", "{hour} Cast checked, fingers warm and pink."],
}

RADIOLOGY = {
    "cardiology": [("CHEST X-RAY (PA)", ["Cardiothoracic ratio is increased at approximately {ctr}.",
                                        "There is upper lobe venous diversion and small bilateral effusions.",
                                        "Septal lines are [seen|present] at the [bases|right base|left base].",
                                        "No focal consolidation. No pneumothorax."],
                    ["Appearances in keeping with cardiac failure.", "Cardiomegaly with pulmonary venous congestion."]),
                   ("CT CORONARY ANGIOGRAM", ["Calcium score {calc}.", "There is a [50-70|70-90] per cent stenosis of the proximal LAD.",
                                              "The right coronary artery is dominant and unremarkable.",
                                              "Incidental small hiatus hernia."],
                    ["Significant proximal LAD disease; consider invasive angiography.", "Moderate single-vessel disease."])],
    "respiratory": [("CHEST X-RAY", ["There is consolidation in the [right lower|left lower|right middle] lobe with air bronchograms.",
                                    "The lungs are hyperexpanded, with flattened hemidiaphragms.",
                                    "There is a [small|moderate|large] [left|right] pleural effusion with a meniscus.",
                                    "No pneumothorax. Heart size [normal|at the upper limit of normal|difficult to assess on this projection].",
                                    "Comparison is made with the previous film of {date}."],
                     ["[Right|Left] lower lobe pneumonia.", "Pleural effusion; suggest ultrasound-guided aspiration.",
                      "Changes of COPD; no acute consolidation."]),
                    ("CT PULMONARY ANGIOGRAM", ["Good opacification of the pulmonary arteries.",
                                                "[Filling defects in the right lower lobe segmental arteries|No filling defect to suggest embolus].",
                                                "Cylindrical bronchiectasis in both lower lobes with mucus plugging.",
                                                "Right ventricle not dilated."],
                     ["[Acute pulmonary emboli|No pulmonary embolus]. Bronchiectasis as described.", "No PE."])],
    "neurology": [("CT HEAD (NON-CONTRAST)", ["No intracranial haemorrhage.",
                                              "There is loss of grey-white differentiation in the [left|right] MCA territory.",
                                              "Hyperdense [left|right] MCA sign.",
                                              "Ventricles and sulci are [appropriate for age|prominent for age|within normal limits].",
                                              "[Small vessel|Chronic small vessel|Mild small vessel] ischaemic change in the periventricular white matter."],
                   ["Early [left|right] MCA infarct; no haemorrhage.", "No acute intracranial abnormality."]),
                  ("MRI BRAIN", ["Restricted diffusion in the [left|right] [internal capsule|thalamus|occipital lobe].",
                                 "[Multiple|Several|Numerous] periventricular and juxtacortical T2 hyperintensities[, some ovoid|, {n} in total|].",
                                 "No mass lesion[. Normal flow voids|; normal flow voids|, no hydrocephalus].",
                                 "[Mild|Moderate] generalised volume loss[, in keeping with age| for age|]."],
                   ["Acute lacunar infarct.", "Appearances suggestive of demyelination; clinical correlation advised."])],
    "gastroenterology": [("CT ABDOMEN AND PELVIS (PORTAL VENOUS)", ["The liver is [small and nodular|enlarged|normal in size] with [moderate|large|no] ascites.",
                                                                   "There is a [3|4|2] cm hypodense mass in the head of the pancreas with dilatation of the common bile duct.",
                                                                   "Sigmoid diverticulosis with surrounding fat stranding.",
                                                                   "No free gas. No collection.",
                                                                   "Splenomegaly of {spleen} cm."],
                          ["Features of cirrhosis with ascites.", "Pancreatic head mass causing biliary obstruction.",
                           "Acute uncomplicated sigmoid diverticulitis."]),
                         ("ULTRASOUND ABDOMEN", ["The gallbladder contains multiple calculi; wall thickness {wall} mm.",
                                                 "Common bile duct measures {cbd} mm.", "The liver is coarse in echotexture.",
                                                 "A small volume of ascites is present."],
                          ["Cholelithiasis without cholecystitis.", "Coarse liver; correlate with LFTs."])],
    "elderly": [("CT HEAD", ["Age-related involutional change.", "Small chronic [right|left] subdural collection measuring {wall} mm.",
                             "No acute haemorrhage."], ["No acute abnormality.", "Small chronic subdural; no mass effect."])],
    "orthopaedics": [("X-RAY [LEFT|RIGHT] WRIST", ["Dorsally angulated fracture of the distal radius.", "Ulnar styloid fracture.",
                                                  "No intra-articular extension."], ["Distal radius fracture as described."]),
                     ("X-RAY PELVIS AND [LEFT|RIGHT] HIP", ["Displaced intracapsular fracture of the femoral neck.",
                                                             "Degenerative change in both hips."], ["Displaced neck of femur fracture."])],
}

TECHNIQUE = [
    "Technique: [axial images acquired|helical acquisition] [without|following] intravenous contrast[, with coronal and sagittal reformats|].",
    "Technique: [standard|departmental|routine {exam_kind}] protocol[ ({n} slices)|]. [Image quality adequate|Some movement artefact limits assessment|Good quality study|Contrast timing satisfactory].",
    "[Portable|Departmental] examination. [Patient rotated|Adequate inspiration|Limited by patient positioning].",
    "[Contrast: 80 mL intravenous, no adverse reaction.|Non-contrast study as requested.|Dose report available on PACS.]",
    "Requested by Dr {surname} ({spec_name}); [urgent|routine|inpatient] request.",
]
TECH_XRAY = [
    "[Portable AP|Departmental PA|Erect] [film|radiograph]. [Patient rotated to the left|Adequate inspiration|Limited by patient positioning].",
    "Single [frontal|AP] view[ only|]. [Image quality adequate|Suboptimal inspiration].",
    "Requested by Dr {surname} ({spec_name}); [urgent|routine|inpatient] request.",
]
INCIDENTAL = [
    "[Incidental note is made of|There is also] a [small|tiny] [simple renal cyst|hiatus hernia|thyroid nodule|calcified granuloma] of no clinical significance.",
    "The visualised [bones|soft tissues|upper abdominal organs] are unremarkable.",
    "[No|There is no] suspicious [bony lesion|lymphadenopathy|mass] is identified.",
    "[Degenerative|Mild degenerative|Multilevel degenerative] change in the [thoracic|lumbar|cervical] spine[ at {level}|].",
    "Lines and tubes: [none|nasogastric tube tip below the diaphragm|right internal jugular line tip in the SVC|ECG leads overlie the chest].",
    "Appearances are [unchanged|slightly worse|improved] compared with the previous examination of {date}.",
    "[Vascular|Aortic|Coronary artery] calcification is [noted|present|moderate][ in the aorta and its branches|].",
    "[The|Both] [lung apices|costophrenic angles|imaged vertebral bodies] are clear.",
]

REFERRAL_OPEN = [
    "Dear Colleague,",
    "Dear Dr {surname},",
    "Dear {spec_name} team,",
    "Re: {pt}, {age}, {addr}",
]
REFERRAL_FIRST = [
    "I would be grateful if you could see this [pleasant|anxious|stoical] {age}-year-old {sexw} who presents with {pc}.",
    "Thank you for seeing {pt_t}, whom I saw in surgery on {date} with {pc}.",
    "I am referring {pt_t} [urgently|routinely|under the two-week pathway] with {pc}.",
    "Please could you assess {pt_t}, aged {age}, [who has had|presenting with] {pc}.",
    "This {age}-year-old [retired|semi-retired|working] {sexw} came to see me [last week|on {date}|this morning] about {pc}.",
]
REFERRAL_LAST = [
    "I would value your advice on [further investigation and management|whether {he} needs {proc}|the next steps|medication].",
    "{He} is happy to be contacted [on the number we hold on file|by telephone|via the practice][, preferably [in the mornings|after {time}]|].",
    "I have advised {him} to [attend the emergency department|call an ambulance|contact us urgently] if [symptoms worsen|{he} develops {pc2}|things deteriorate].",
    "I would be grateful for your [opinion|assessment|help] at your earliest convenience.",
    "Many thanks for your help with {his} [care|management|ongoing care][, {gp_doc_first}|].",
]
REFERRAL_BODY = [
    "[Over the last few weeks|Since {month}|For about three months] {he} has also noticed {pc2}.",
    "I have started {drug} in the meantime, with [some|little|no] improvement.",
    "[Bloods|Recent bloods|Bloods on {date}] [here|at the surgery] showed {blood_result}.",
    "{He} is otherwise [fit and well|reasonably well|independent] and [works as a [teacher|bus driver|farmer|care worker|chef|shop manager]|is a retired [engineer|nurse|postman|fisherman]][ in {town}|].",
    "{He} is understandably [worried|anxious|frightened], as [a friend|{his} brother|{his} mother|a colleague|{his} neighbour] had [a similar illness|something similar|a {dx} in {year}].",
    "I note that {he} was last seen in your clinic in {year} and discharged.",
]
REFERRAL_CLOSE = [
    "Many thanks,\nDr {gp_doc}\n{gp}",
    "Yours sincerely,\n\nDr {gp_doc}, GP\n{gp}",
    "[Best wishes|Many thanks again|With thanks],\n{gp_doc}",
    "Kind regards\nDr {gp_doc} ({gp})",
]

CLINIC_OPEN = [
    "Dear Dr {gp_doc},",
    "Dear Dr {gp_doc}\n\nRe: {pt} (hospital number {mrn})",
    "Dear {pt_t}, (copy to GP)",
]
CLINIC_FIRST = [
    "I reviewed {pt_t} in the {spec_name} clinic [today|on {date}].",
    "Thank you for referring this {age}-year-old {sexw} with {pc}, whom I saw in clinic [today|on {date}].",
    "I saw {pt_t} [again|for the first time] in [the|my] {spec_name} clinic [this afternoon|this morning|on {date}].",
    "[Many thanks for asking me to see|Thank you for your letter about] {pt_t}, who has {pc}.",
]
CLINIC_LAST = [
    "It was a pleasure to [meet|see] {him}[ and {his} [daughter|son|husband|wife]| again|].",
    "Please do not hesitate to contact [me|the {spec_name} secretaries|our specialist nurse] if you have any [concerns|questions about {his} care].",
    "I have not arranged routine follow-up but would be happy to see {him} again if needed.",
    "I will see {him} again in [three|six|twelve] months with repeat bloods beforehand.",
    "I have copied this letter to {pt_t}.",
]
CLINIC_BODY = [
    "{He} [attended with {his} daughter|came alone|was accompanied by {his} husband|was accompanied by {his} wife], who added useful history.",
    "Since we last met {he} has been [much better|about the same|struggling a little], and {his} main concern now is {pc2}.",
    "I have explained the [results|{inv_short} findings|options] and {he} was [reassured|understandably disappointed|keen to proceed|happy with the plan][ - {his} {relative} was present|].",
    "We discussed the risks and benefits of {proc}, and {he} would like to go ahead.",
    "I have increased {drug} to {dose} and would be grateful if you could continue this.",
    "{He} asked about [driving|returning to work|flying abroad in {month}|contact sports]; I have advised {him} [to inform the licensing authority|to wait until the next review|that this should be fine|to hold off for now].",
]
CLINIC_CLOSE = [
    "Yours sincerely,\n\nDr {cons}\nConsultant in {spec_name}",
    "[With best wishes|Best wishes|Warm regards],\n{cons}, Consultant[ in {spec_name}|]",
    "Yours sincerely\n\n{cons}\n{spec_name} Department, {hosp}",
    "Kind regards,\nDr {cons} (dictated, not signed)",
]
PROCEDURES = ["angiography", "a loop recorder", "colonoscopy", "an OGD", "a lumbar puncture",
              "bronchoscopy", "a cardioversion", "a trial of medication withdrawal"]

MEDREV_INTRO = [
    "MEDICATION REVIEW - {pt} ({age}{sex1}) - {date}",
    "Pharmacist medication review[ ({date})| - {hosp}|]\nPatient: {pt}  Ward: {ward}",
    "Structured medication review, {gp}, reviewed by {person} (clinical pharmacist)",
    "Medicines reconciliation on admission - {ward}",
]
MEDREV_BODY = [
    "Reason for review: [polypharmacy|recent admission|falls|renal function decline|patient request].",
    "Allergies: [NKDA|penicillin (rash)|{drug} (angioedema)|none known|olvicillin (hives, {year})|sticking plaster|NKDA confirmed with {pt_t}].",
    "Adherence: {pt_t} uses a [blister pack|dosette box|app reminder] and reports [good|patchy|poor] adherence.",
    "eGFR {egfr} mL/min; dose of {drug} adjusted accordingly.",
    "Interaction noted between {drug} and {drug2}; [prescriber informed|monitoring advised|switched to an alternative].",
    "{drug} stopped - no clear ongoing indication.",
    "{drug} reduced from {dose} to {dose2} because of [dizziness|low blood pressure|bradycardia|drowsiness].",
    "Patient counselled on the use of {drug}; written information provided.",
    "[Total of {nmeds} regular medicines, reduced to {nmeds2} after review.|Number of regular medicines unchanged at {nmeds}.]",
    "Anticholinergic burden score {acb}; consider deprescribing.",
    "Plan agreed with {pt_t} and {his} [daughter|son|carer].",
    "GP to recheck [U&E|U&E and magnesium|potassium|renal function] in [one week|two weeks|a fortnight|{n} days][ after the dose change|].",
]

TRIAGE_CATS = ["1 (immediate)", "2 (very urgent)", "3 (urgent)", "4 (standard)", "5 (non-urgent)"]


SPEC_WARDS = {
    "cardiology": ["Ward 12 (Cardiology)", "Kestrel Ward"],
    "respiratory": ["Ward 4 (Respiratory)", "Heron Ward"],
    "neurology": ["Ward 9 (Stroke Unit)", "Wren Ward"],
    "gastroenterology": ["Ward 3 (Gastroenterology)", "Larch Ward"],
    "elderly": ["Alder Ward", "Teasel Ward"],
    "orthopaedics": ["Ward 15 (Trauma)", "Teasel Ward"],
}
