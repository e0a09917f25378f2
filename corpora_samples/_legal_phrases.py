"""Phrase pools for the legal corpus (invented Republic of Quellmar).

Templates use the syntax of ``_grammar``: [a|b] alternatives, [?a] optional
parts and {slot} values.  Every name, place and statute is invented.
"""

AREAS = ["tenancy", "employment", "contract", "family"]

# ---------------------------------------------------------------------------
# Facts, by area of law.  Used by judgments, appeals, memos and letters.
# ---------------------------------------------------------------------------
FACTS = {
    "tenancy": [
        "{tenant} has occupied the [flat|dwelling|premises|ground-floor maisonette|two-bedroom house|upper flat] at {prop} since {date_past}[ under a written lease| under an oral periodic arrangement| under a lease for a fixed term of {n_small} years].",
        "The [monthly rent|rent] was {rent}, payable [in advance|monthly in advance|by standing order] on the [first|fifth|fifteenth|twenty-eighth] day of each month.",
        "By {date} the [rent arrears|arrears of rent] had reached {amt}, [according to the landlord's ledger|on the landlord's own figures|a figure the tenant does not dispute|although the tenant disputes roughly a third of that sum].",
        "{landlord} served a notice to quit on {date}, relying on section {sec} of the {act_t}.",
        "The tenant says the notice to quit was [defective|served at the wrong address|given without the prescribed period|not in the prescribed form], and that no possession order should [be made|follow].",
        "A security deposit of {amt_small} was paid at the outset[ and, it is common ground,|, but] [was never registered with an approved scheme|was placed with the Deposit Safekeeping Office within the statutory period|was retained by the agent in a general client account].",
        "There is a long history of complaints about [damp|mould in the rear bedroom|a failing boiler|water ingress through the roof|defective wiring|a broken communal door], which the tenant says amounted to a breach of the covenant for quiet enjoyment.",
        "Photographs taken by the tenant in {month} {year} show [extensive black mould|a collapsed kitchen ceiling|standing water beneath the sink|a broken front-door lock|rotten window frames].",
        "The landlord's [agent|managing agent|letting agent], {company}, accepts that [three|several|at least two|seven] repair requests were [received|logged] but says access was [refused|never offered|offered only at short notice].",
        "After the fixed term expired the tenant remained in occupation, so that a periodic tenancy [arose|came into being] by operation of law.",
        "The landlord contends that {tenant} is a holdover occupier with no right to remain after {date}.",
        "A dilapidations schedule prepared by [a surveyor|{person}, a chartered surveyor,|the landlord's building consultant] put the cost of reinstatement at {amt}.",
        "The lease contains a rent review clause permitting an upward review every [two|three|five] years by reference to [open-market rent|the published housing index].",
        "{landlord} purported to levy distraint for rent by removing [furniture|goods|a delivery van|stock] from the premises, a step the tenant says was [unlawful|disproportionate|taken without the required notice].",
        "The landlord also relies on forfeiture of the lease for breach of the covenant against [subletting|business use|alterations without consent].",
        "It is said that the tenant sublet [a room|the basement|part of the premises|the garage] to {person} without consent.",
        "The Housing and Leases Tribunal made an interim order on {date} requiring [repairs to be completed within {n} days|the landlord to restore the water supply|the deposit to be protected].",
        "{tenant} lives at the property with [two children|an elderly parent|a partner and a young child|a lodger], which is relevant to the question of reasonableness.",
        "The arrears arose [during a period of illness|after the tenant lost [her|his] job|after housing support was suspended|when the landlord refused to accept part-payments].",
        "The landlord offered a payment plan of {amt_small} a month, which was [accepted and then abandoned|rejected|never put in writing].",
        "Neither party obtained an inventory at the start of the tenancy, which makes the deposit dispute [difficult|almost impossible] to resolve.",
        "The tenancy agreement is a standard-form document produced by {company} and runs to [nine|eleven|fourteen|six] pages.",
        "The repair covenant at clause {clause} obliges the landlord to keep the structure and exterior in repair.",
        "On {date} the [boiler|water heater|roof|staircase] failed completely and the tenant [moved out for a week|paid for emergency repairs|reported the matter to the housing inspector].",
    ],
    "employment": [
        "{employee} was employed by {employer} as [a warehouse supervisor|a payroll clerk|a delivery driver|a ward housekeeper|a software tester|a site manager|a pastry chef|a laboratory technician|a sales adviser] from {date_past} until {date}.",
        "{employee} was dismissed on {date}[ following a disciplinary hearing| without any hearing| by letter| by text message], the stated reason being [gross misconduct|redundancy|capability|a breakdown in trust and confidence].",
        "The claim is for unfair dismissal under section {sec} of the {act_e}[, together with a claim for notice pay| and for unpaid holiday pay|].",
        "The employer says the role was genuinely redundant after [the loss of a major contract|a restructuring of its {dept} department|the closure of the {town} depot].",
        "The redundancy selection pool comprised [four|six|eleven|nine] employees, scored against criteria that the claimant says were never disclosed.",
        "A grievance lodged on {date} complained of [bullying by a line manager|unpaid overtime|changes to shift patterns|a failure to make reasonable adjustments].",
        "The grievance procedure in the staff handbook required a meeting within [five|ten] working days; [none took place|the meeting was held six weeks late].",
        "The claimant resigned on {date} and claims constructive dismissal, relying on a series of acts culminating in [a demotion|a pay cut|the removal of [her|his] team].",
        "The contract of employment contains a restraint of trade clause preventing work for a competitor within [twelve|twenty-five|fifty] kilometres for [six|twelve] months.",
        "During the notice period the claimant was placed on garden leave and told not to contact [clients|suppliers|former colleagues].",
        "The claimant says [she|he] made a protected disclosure on {date} concerning [falsified safety records|overcharging of a public body|the disposal of chemical waste].",
        "The employer's witness, {person}, [the operations director|the head of human resources|the regional manager], gave evidence that [the decision had already been taken|performance concerns were long-standing|the disciplinary hearing was properly convened].",
        "Wage slips show that the claimant was paid {amt_small} a week, [below|barely above] the minimum set by the {act_e}.",
        "[He|She] was engaged on a zero-hours engagement, but in practice worked [forty|thirty-eight|forty-five] hours a week for over [two|three|four] years.",
        "The dismissal letter does not mention any right of appeal[, contrary to the employer's own policy|].",
        "An investigation report prepared by {person} ran to [four|twelve|twenty] pages and relied heavily on [CCTV footage|till records|witness statements].",
        "The claim for wrongful dismissal turns on whether summary dismissal was justified by [the alleged theft|the altercation with a colleague|the breach of the confidentiality policy].",
        "Attempts at conciliation through the [Workplace Conciliation Service|tribunal's mediation scheme] failed in {month}.",
        "The claimant's line manager, {person}, conducted the disciplinary hearing despite having [witnessed|reported] the incident.",
        "Holiday pay for the final leave year was calculated on basic pay only, excluding [regular overtime|commission|shift allowances].",
        "The claimant had [nine|four|fourteen] years' continuous service and an unblemished disciplinary record.",
    ],
    "contract": [
        "By a written agreement dated {date}, {seller} agreed to supply {buyer} with [industrial refrigeration units|two hundred tonnes of cement|a bespoke booking system|marine diesel engines|printed packaging|laboratory glassware] for {amt}.",
        "Delivery was due by {date} under the delivery schedule, and the agreement provided that time was to be of the essence.",
        "The goods delivered [failed acceptance testing|were found to be defective|did not match the specification|arrived some eleven weeks late].",
        "{buyer} claims damages for breach of warranty, in particular the warranty at clause {clause} that the goods would be fit for purpose.",
        "The agreement contains a liquidated damages clause of {amt_small} per day of delay, capped at [ten|fifteen|twenty] per cent of the price.",
        "{seller} relies on a force majeure clause, pointing to [flooding at its {town} plant|a strike at the port of {town}|the failure of a sole supplier].",
        "Clause {clause} provides a limitation of liability to the price paid and excludes loss of profit[; the buyer says the clause is unreasonable|, a limitation the buyer accepts was negotiated].",
        "The buyer seeks rescission on the ground of misrepresentation, relying on statements made in a sales presentation on {date}.",
        "An indemnity at clause {clause} requires the supplier to meet third-party claims arising from defects.",
        "The goods were sold subject to a retention of title clause, and the seller now seeks to recover [stock held in the buyer's warehouse|the unpaid units|the engines still in their crates].",
        "The claimant seeks specific performance of the agreement to [sell the land at {addr}|transfer the shares|assign the distribution rights].",
        "A novation agreement signed on {date} purported to transfer the contract to {company}.",
        "The invoice for {amt} remains unpaid, and interest is claimed under the {act_c}.",
        "The defendant says no binding contract was formed because [the price was never agreed|the offer was withdrawn before acceptance|the purchase order incorporated different terms].",
        "Email exchanges between {person} and {person} show the parties negotiating [the payment schedule|the warranty period|delivery dates] well after the supposed signature date.",
        "The supplier's standard terms were printed on the back of the purchase order but were never [signed|drawn to the buyer's attention].",
        "The price was payable in [three|four] instalments, the second of which fell due on {date}.",
        "Acceptance testing was to be carried out at {buyer}'s premises in {town} within {n} days of delivery.",
        "The warranty period was [twelve|eighteen|twenty-four] months from commissioning.",
        "The supplier issued a credit note for {amt_small} but refused any further compensation.",
    ],
    "family": [
        "The parties married in {year_m} and separated in {year}; they have [one child|two children|three children], now aged {kid_ages}.",
        "{mother} applies for a contact order[ varying the arrangements made in {year}| permitting overnight stays| for supervised contact only].",
        "The father, {father}, seeks shared custody, proposing that the children live with him [alternate weeks|during school holidays|from Thursday to Monday].",
        "A guardian ad litem, {person}, was appointed on {date} and has filed a report recommending [a gradual increase in contact|that the present arrangements continue|that the relocation application be refused].",
        "[Child maintenance|Maintenance for the children] was assessed under the {act_f} at {amt_small} per month, which the father says he cannot afford.",
        "The father has paid no child maintenance since {date}[, and arrears are said to exceed {amt}|].",
        "The matrimonial home at {addr} is held in joint names and is subject to a mortgage of about {amt}.",
        "In the financial remedy proceedings the wife seeks [a lump sum of {amt}|transfer of the matrimonial home|a share of the husband's pension].",
        "The husband has not given full disclosure of his interest in {company}.",
        "The mother has made a relocation application, wishing to move with the children to {town}, some [ninety|two hundred|sixty] kilometres away, for a new post.",
        "A parenting plan agreed at mediation on {date} broke down within [weeks|a month|the first school term].",
        "The court made a non-molestation order on {date}, without notice, after an incident at {addr}.",
        "Spousal support was paid voluntarily until {date}, when payments stopped.",
        "The decree of separation was granted on {date}, and ancillary relief remains outstanding.",
        "The children's school reports, produced by the guardian, describe [anxiety|improved attendance|a settled routine|difficulty concentrating].",
        "The [paternal|maternal] grandparents ask to be joined as parties to the contact proceedings.",
        "Since the separation the children have lived mainly with {mother} in {town}.",
        "The father's work involves [long-distance haulage|night shifts|frequent travel abroad], which limits his availability on weekdays.",
        "Both parents accept that [the children|{kids_names}] should not be asked to choose between them.",
        "A welfare officer visited both homes in {month} and found them [suitable|adequate, if cramped|clean and well organised].",
        "The wife's claim for spousal support is resisted on the basis that she [has since found full-time work|cohabits with a new partner].",
    ],
}

# ---------------------------------------------------------------------------
# Reasoning and procedure (judgments, appeals, tribunal decisions).
# ---------------------------------------------------------------------------
REASONING = [
    "I have considered the [written|oral and written|documentary] evidence with care[ and have had the advantage of seeing the witnesses give evidence| and the helpful written submissions of both counsel].",
    "The burden of proof lies on the {p1role}, and the standard is the balance of probabilities.",
    "I found {person} to be [a careful and candid witness|an evasive witness|honest but unreliable on dates|generally reliable, save where [her|his] own conduct was in issue].",
    "The [starting point|proper starting point] is the language of the [agreement|statute|provision] itself, read in its [commercial|statutory|factual] context.",
    "In {citation} the Court of Appeal held that [a notice must be construed as a reasonable recipient would understand it|the test is an objective one|procedural fairness is not a mere formality|a party cannot rely on its own breach].",
    "Counsel for the {p2role}, Mr {surname}, submitted that [the claim was brought out of time|the relevant clause was never incorporated|the evidence did not support the pleaded case].",
    "Ms {surname}, who appeared for the {p1role}, [accepted|conceded|did not dispute] that [the documents were incomplete|the chronology was unclear in places|the point had not been pleaded].",
    "I do not accept that submission[, for three reasons|; it is inconsistent with the contemporaneous documents|].",
    "[In my judgment|In my view|On balance], the [contemporaneous documents|emails of {date}|minutes of the meeting] are the most reliable guide to what was agreed.",
    "It is [unnecessary|not necessary] to decide whether [the earlier notice was valid|the second ground is made out], given the conclusion I have reached on the first issue.",
    "The {act_g} requires a claim of this kind to be issued within [three|six] years of the cause of action accruing.",
    "The issues for determination are, first, [whether the notice was valid|whether a contract was concluded|whether the dismissal was fair|what arrangements serve the children's welfare] and, secondly, [what relief should follow|the quantum of any award].",
    "There was [little|no real|a good deal of] dispute about the primary facts.",
    "The witness statement of {person} was admitted without cross-examination under the {act_g}.",
    "I must also consider whether the {p2role} acted reasonably in all the circumstances.",
    "[Although|While] the point was not argued in detail, I should record that [I have considered the authorities cited in the skeleton arguments|the court has power to extend time|the parties were given the opportunity to file further submissions].",
    "The documentary record is [sparse|voluminous|incomplete], and several key pages were produced only on the morning of the hearing.",
    "I remind myself that the court should not substitute its own view for that of the [decision-maker|landlord|employer|parties].",
    "[Weighing all of these matters|Taking the evidence as a whole|Standing back], I am satisfied that the {p1role} has made out [the claim|the greater part of the claim|the first limb of the claim].",
    "[Weighing all of these matters|Taking the evidence as a whole|Standing back], I am not satisfied that the {p1role} has discharged the burden of proof.",
    "The hearing took place [in person at {town}|by video link|over {n_small} days in {month}], and judgment was reserved.",
    "No point was taken on [jurisdiction|limitation|service][, rightly in my view| by either party|].",
    "The chronology set out in the agreed bundle is [largely uncontroversial|not in dispute|not seriously challenged|agreed in most respects].",
    "It is common ground that the relevant events took place between {date_past} and {date}.",
    "[That is a finding of fact|That conclusion] which, in my view, was plainly open to me on the evidence.",
    "I have not found it necessary to refer to every document in the [bundle|{n}-page bundle|supplementary bundle], but I have read them all[ with care|].",
    "The court is required to give effect to the overriding objective of dealing with cases justly and at proportionate cost.",
    "The authorities on this point are not entirely consistent, and I was referred to {citation} and {citation}.",
    "The {p2role} did not attend the final hearing and was not represented[, although notice had been properly given|].",
    "Permission to rely on expert evidence was limited to a single jointly instructed expert, {person}.",
    "Both parties were [anxious|keen] to avoid the cost of a further hearing[, estimated at {amt}|], and I have borne that in mind.",
]

JUDGMENT_INTROS = {
    "tenancy": [
        "This is a claim by {party1} for possession of {prop} and for arrears of rent.",
        "The landlord, {landlord}, seeks a possession order on the ground of rent arrears[ and breach of the repair covenant|].",
        "The tenant, {tenant}, counterclaims for damages for disrepair and breach of the covenant for quiet enjoyment.",
    ],
    "employment": [
        "The claimant, {employee}, brings claims against [her|his] former employer, {employer}, arising from the termination of [her|his] employment.",
        "This claim concerns the dismissal of {employee} by {employer} in {year}.",
    ],
    "contract": [
        "This is a commercial dispute between {buyer} and {seller} about [a supply agreement|a failed delivery|unpaid invoices|defective goods].",
        "{buyer} claims damages from {seller} for breach of contract[; {seller} counterclaims for the unpaid price|].",
    ],
    "family": [
        "These proceedings concern [the children of|the finances of] {mother} and {father}, who separated in {year}.",
        "The mother applies for orders relating to the children; the father opposes the application in part.",
    ],
    "any": [
        "[The|These] proceedings concern {matter}.",
        "By a claim issued on {date}, the {p1role} seeks [relief against the {p2role}|declarations and damages|final orders].",
        "I heard this matter on {date}, [when both parties were represented|when the {p2role} appeared in person|over two days]. Judgment was reserved.",
        "The background can be [shortly|simply] stated[, as most of it is agreed|].",
        "[This judgment|My judgment] is in [three|four|five] parts: the facts, the law, and my conclusions[ on each issue|].",
    ],
}

CONCLUSIONS = [
    "For these reasons the claim [succeeds|is allowed|is dismissed|succeeds in part].",
    "I will make an order in the terms of the draft [agreed between counsel|handed up at the hearing], with costs [to follow the event|reserved|on the standard basis].",
    "The {p2role} shall pay the {p1role} {amt} within {n} days[, together with interest at the statutory rate|].",
    "Any application for permission to appeal should be made in writing within {n_small} days of the hand-down of this judgment.",
    "I am grateful to counsel for their [clear and concise|careful|thorough] submissions.",
    "There will be a possession order in favour of the landlord, suspended on terms that the current rent and {amt_small} towards the arrears are paid each month.",
    "The contact order will be varied so that the children spend alternate weekends and half of each school holiday with their father.",
    "The claimant is entitled to a basic award and a compensatory award, to be assessed at a remedy hearing on {date} unless agreed.",
    "Judgment is entered for the claimant in the sum of {amt}, together with costs to be assessed if not agreed.",
    "The matter will be listed for a short directions hearing in [the week commencing|the fortnight after] {date}.",
    "Costs are reserved to the judge hearing the remedy stage[, to be listed after {date}|].",
]

APPEAL = [
    "This is an appeal from the decision of {lower_judge} in the {lower_court} dated {date}.",
    "Permission to appeal was granted on [two|three|four] of the [five|six|seven] grounds advanced.",
    "The first ground of appeal is that the judge [misdirected herself as to the law|failed to give adequate reasons|took into account an irrelevant consideration|reached a conclusion no reasonable tribunal could reach].",
    "The second ground contends that the judge was wrong to [admit the late witness statement|refuse an adjournment|construe clause {clause} as she did].",
    "An appellate court will interfere with findings of primary fact only where they are plainly wrong[: see {citation}|].",
    "We have read the transcript of the hearing [below|of {date}] with care[, all {n} pages of it|].",
    "The appellant's skeleton argument, settled by {firm}, runs to [thirty|twenty-two|forty-one] pages.",
    "[For the respondent|On behalf of the respondent], Ms {surname} submitted that the judge's reasoning, read fairly and as a whole, was unimpeachable.",
    "We agree with the judge that [the notice was valid|the dismissal was within the range of reasonable responses|the clause was incorporated|the children's welfare required a gradual approach].",
    "With respect to the judge, we consider that she [overlooked|gave insufficient weight to] the {doc_thing}.",
    "The appeal is [allowed|dismissed], and the matter is [remitted for rehearing before a different judge|not remitted].",
    "Justice {surname} and Justice {surname} agree with the judgment that follows, delivered by {judge}.",
    "The respondent's notice seeks to uphold the decision on an additional ground, namely that the claim was in any event time-barred under the {act_g}.",
    "It is not the function of this court to retry the case[ on the papers|, however strongly the {p2role} feels|].",
    "The appellant applied on {date} to adduce fresh evidence, which we refused.",
]

TRIBUNAL = [
    "The claimant represented [herself|himself]; the respondent was represented by {person} of {firm}.",
    "The tribunal heard evidence from the claimant and from [two|three|four] witnesses for the respondent.",
    "The tribunal had before it an agreed bundle of [212|348|97|154|260] pages.",
    "The tribunal [reminds itself|is conscious|bears in mind] that it must not substitute its own view for that of [the employer|the respondent|{employer}|the dismissing officer].",
    "The question is whether [dismissal|the decision to dismiss|summary dismissal] fell within the band of reasonable responses open to a reasonable employer[ of this size|].",
    "The tribunal finds that the respondent [did|did not] follow a fair procedure before dismissing the claimant.",
    "Any compensatory award will be reduced by [twenty|thirty|fifty] per cent to reflect the claimant's contributory conduct.",
    "The tribunal is satisfied that there was [no genuine|only cursory|no meaningful] consultation about [alternative roles|the selection criteria|redeployment] [before {date}|].",
    "The claim for holiday pay is well-founded and the respondent is ordered to pay {amt_small}.",
    "The claim for [notice pay|arrears of pay|holiday pay|a redundancy payment] is dismissed upon withdrawal by the claimant[ on {date}|].",
    "The [employer's|respondent's] disciplinary policy [provides for|promises] a right of appeal to a manager not previously involved[, within {n} days|].",
    "The tribunal did not find [the respondent's|{person}'s|the employer's] account of the [redundancy consultation|investigation|meeting of {date}] [credible|convincing|consistent with the documents].",
    "The tribunal considered the guidance of the Court of Appeal in {citation}.",
]

# ---------------------------------------------------------------------------
# Genre-specific material.
# ---------------------------------------------------------------------------
NOTICE_TYPES = [
    ("NOTICE TO QUIT", [
        "You are required to give up possession of the premises known as {prop} on or before {date}.",
        "This notice is given under section {sec} of the {act_t}.",
        "The reason for this notice is [rent arrears of {amt}|the landlord's intention to sell the property|persistent breach of the tenancy agreement|the landlord's intention to carry out substantial works].",
        "If you do not leave by [the date given|{date}], [the landlord|{landlord}] may apply to the [court|District Court at {town}] for a possession order.",
        "You are advised to seek independent advice [immediately|as soon as possible|from a solicitor or an advice centre].",
        "Nothing in this notice affects your rights under the {act_t} in respect of your security deposit.",
    ]),
    ("NOTICE OF RENT INCREASE", [
        "The landlord proposes a new rent of {rent} per month with effect from {date}.",
        "The present rent is {amt_small} per month, last reviewed on {date_past}.",
        "This increase is made under the rent review clause at clause {clause} of your tenancy agreement.",
        "If you do not agree with the proposed rent you may refer it to the Housing and Leases Tribunal before the date on which it takes effect.",
        "The landlord has considered comparable rents for similar dwellings in {town}.",
    ]),
    ("NOTICE OF INTENDED ENTRY", [
        "The landlord or its agent, {company}, intends to enter the premises at {prop} on {date} between [9 a.m. and 1 p.m.|10 a.m. and noon|2 p.m. and 5 p.m.].",
        "The purpose of the visit is [to inspect the condition of the property|to carry out repairs to the {repair_item}|to allow a gas safety check|to prepare a dilapidations schedule].",
        "This notice is given in accordance with [the repair covenant|clause {clause} of the lease] and the tenant's right to quiet enjoyment.",
        "If the proposed time is inconvenient, please contact [the agent|{company}|the landlord] [on the number above|in writing|by email] to arrange another appointment.",
    ]),
    ("NOTICE OF DEPOSIT PROTECTION", [
        "Your security deposit of {amt_small} has been registered with the Deposit Safekeeping Office under reference {ref}.",
        "The deposit will be returned within {n} days of the end of the tenancy, less any sums properly deducted.",
        "Disputes about deductions may be referred to the adjudication service established by the {act_t}.",
        "Please keep this notice with your tenancy documents.",
    ]),
    ("NOTICE OF ARREARS AND DISTRAINT", [
        "Rent arrears of {amt} are outstanding on your account as at {date}.",
        "Unless the arrears are paid within {n} days, the landlord may exercise a right of distraint for rent in accordance with the {act_t}.",
        "Goods that are exempt by law, including tools of trade and essential household items, will not be taken.",
        "You may wish to propose a payment plan in writing before that date.",
    ]),
]

NOTICE_EXTRA = [
    "Dated {date}.",
    "Signed: {person}, for and on behalf of {landlord}.",
    "Landlord: {landlord}. Tenant: {tenant}.",
    "Served by [first-class post|hand delivery|email with the tenant's prior consent] on {date}.",
    "Reference: {ref}.",
    "IMPORTANT: [please read this notice carefully|this is a legal document|keep this notice in a safe place].",
    "Information about housing advice is available from the {town} Tenancy Advice Centre.",
    "[Please note that|Note:] the landlord's address for service is {addr}.",
]

CLAUSES = [
    ("Definitions", "In this Agreement, '[Goods|Services|Deliverables]' means the items described in Schedule {sched}, and 'Business Day' means a day other than a Saturday, Sunday or public holiday in the {country}."),
    ("Supply", "The Supplier shall supply the Goods to the Buyer in accordance with the delivery schedule set out in Schedule {sched}."),
    ("Price and payment", "The Buyer shall pay each invoice within [thirty|forty-five|sixty] days of receipt, and the price is exclusive of any applicable sales tax."),
    ("Late payment", "Interest shall accrue on overdue sums at the rate prescribed by the {act_c} from the due date until payment."),
    ("Warranty", "The Supplier warrants that the Goods will, for a period of [twelve|eighteen|twenty-four] months from delivery, be free from material defects and fit for the purpose made known to it in writing."),
    ("Breach of warranty", "The Buyer's sole remedy for breach of warranty shall be repair or replacement of the defective Goods[, or, at the Supplier's option, a refund of the price|]."),
    ("Limitation of liability", "Subject to clause {clause}, the total liability of either party under this Agreement shall not exceed [the price paid|{amt}|one hundred and twenty-five per cent of the fees paid in the preceding year]."),
    ("Exclusions", "Neither party shall be liable for loss of profit, loss of revenue or any indirect or consequential loss."),
    ("Liquidated damages", "If delivery is delayed beyond the agreed date, the Supplier shall pay liquidated damages of {amt_small} for each day of delay, up to a maximum of [ten|fifteen] per cent of the price."),
    ("Force majeure", "Neither party shall be in breach of this Agreement if performance is prevented by events beyond its reasonable control, including [flood, fire and industrial action|acts of government, epidemic and failure of public utilities]."),
    ("Indemnity", "The Supplier shall indemnify the Buyer against all losses arising from any claim that the Goods infringe the rights of a third party."),
    ("Retention of title", "Title in the Goods shall not pass to the Buyer until the Supplier has received payment in full, and until then the Buyer shall store the Goods separately and mark them as the Supplier's property."),
    ("Termination", "Either party may terminate this Agreement by written notice if the other commits a material breach and fails to remedy it within [fourteen|thirty] days of being notified."),
    ("Confidentiality", "Each party shall keep confidential all information received from the other and shall use it only for the purposes of this Agreement."),
    ("Assignment and novation", "Neither party may assign or novate this Agreement without the prior written consent of the other, such consent not to be unreasonably withheld."),
    ("Governing law", "This Agreement is governed by the law of the {country}, and the courts of {town} shall have exclusive jurisdiction."),
    ("Notices", "Any notice under this Agreement shall be in writing and delivered by [hand or by registered post|hand, courier or registered post|email with a confirmation copy by post] to the address stated [above|in Schedule {sched}]."),
    ("Entire agreement", "This Agreement constitutes the entire agreement between the parties and supersedes all prior representations; nothing in this clause limits liability for fraudulent misrepresentation."),
    ("Variation", "No variation of this Agreement shall be effective unless it is in writing and signed by an authorised signatory of each party."),
    ("Time of the essence", "Time shall be of the essence as regards the delivery dates set out in Schedule {sched}."),
    ("Acceptance", "The Buyer shall carry out acceptance tests within {n} Business Days of delivery and shall notify the Supplier of any failure in writing."),
    ("Insurance", "The Supplier shall maintain product liability insurance with a reputable insurer for not less than {amt} per claim."),
    ("Dispute resolution", "Any dispute shall first be referred to a meeting of senior representatives and, failing resolution within {n} days, to mediation in {town}."),
    ("Specific performance", "The parties agree that damages may not be an adequate remedy for breach of clause {clause}, and that the court may order specific performance."),
    ("Rescission", "The Buyer shall not be entitled to rescind this Agreement for misrepresentation except in the case of fraud."),
    ("Set-off", "The Buyer may not withhold or set off any amount due to the Supplier against sums claimed from it."),
    ("Subcontracting", "The Supplier may subcontract any of its obligations, but remains responsible for the acts and omissions of its subcontractors."),
    ("Audit", "The Buyer may, on giving [ten|twenty] Business Days' notice, inspect the Supplier's records relating to the Goods once in each calendar year."),
    ("Severance", "If any provision of this Agreement is held invalid, the remaining provisions shall continue in full force."),
    ("Counterparts", "This Agreement may be executed in any number of counterparts, each of which is an original."),
]
CLAUSE_INTROS = [
    "THIS AGREEMENT is made on {date} BETWEEN {seller} (the 'Supplier') AND {buyer} (the 'Buyer').",
    "Extract from the master supply agreement between {seller} and {buyer} dated {date}.",
    "Standard terms and conditions of sale of {seller} (revision {n_small}, {year}).",
    "Schedule {sched}: Key commercial terms (draft for discussion - {firm}).",
    "Heads of terms agreed between {buyer} and {seller} on {date}, subject to contract.",
    "The following clauses are taken from a services agreement governed by the law of the {country}.",
]

MEMO_OPEN = [
    "You asked me to look at [the file|the papers|the correspondence] in {matter} and advise on [prospects|next steps|the limitation position|likely costs].",
    "Following our call [this morning|yesterday|on {date}], here is a short note on {matter}.",
    "I have now reviewed the documents sent over by {client_name} in {matter}.",
    "This memo summarises where we are in {matter} ahead of the [client meeting|case management conference|mediation] on {date}.",
    "Quick update on {matter} - apologies for the delay, the bundle only arrived [on Friday|yesterday|late last week].",
]
MEMO_BODY = [
    "In short, I think the client has [reasonable|good|at best modest|poor] prospects on liability, but quantum is [uncertain|likely to be modest|where the real fight will be].",
    "The key document is [the {doc_thing}|an email of {date}|the signed variation], which we do not yet have in full.",
    "My main concern is [limitation|the gap in the chronology|the client's own emails|the lack of a signed copy].",
    "We should ask the client for [bank statements|the full email chain|the original notice|witness details] before going further.",
    "If the matter does not settle, I would estimate costs to trial at around {amt}.",
    "The other side are represented by {firm}, who have so far been [constructive|slow to respond|combative].",
    "I would not recommend issuing proceedings until we have [taken counsel's view|seen the disclosure|tested the expert evidence].",
    "There is a reasonable argument under the {act_g}, but the point is untested at appellate level.",
    "The client is keen to resolve this quickly and has indicated a settlement range of {amt_range}.",
    "A without-prejudice offer might be pitched at {amt} with each side bearing its own costs.",
    "Please diarise the deadline of {date} for the defence - it cannot be extended without the court's permission.",
    "I have attached a short chronology[ ({n} entries)|]; it needs checking against [the client's diary|the emails|the bank statements].",
    "Action points: (1) chase [the client|{client_name}] for [documents|the signed statement|bank records]; (2) [letter before claim|reply to {firm}]; (3) update the costs estimate[ by {date}|].",
    "The judge allocated to the case, {judge}, is known to take a firm line on [late disclosure|costs budgets|adjournments].",
    "On balance I would advise [mediation before issue|a robust letter before claim|that we wait for their response|an early settlement offer].",
    "{firm_short} acted for the counterparty in a similar matter last year, so we should check for conflicts.",
]
MEMO_CLOSE = [
    "Happy to discuss.",
    "Let me know if you want me to draft the letter.",
    "I can turn this into a formal advice if [the client|{client_name}] wants one[ - probably {n} pages|].",
    "Grateful for your thoughts before I speak to the client.",
    "{initials}",
    "Regards, {author}",
]

SI_INTROS = [
    "STATUTORY INSTRUMENTS OF THE {country_upper}\n{year} No. {si_no}\n{si_title}",
    "{si_title}\n(Statutory Instrument {year}/{si_no})",
    "Excerpt - {si_title}, made under the {act_parent}",
]
SI_PREAMBLE = [
    "Made on {date}. Laid before the National Assembly on {date}. Coming into force on {date}.",
    "Made {date} - Coming into force {date}",
    "The Minister for [Justice|Housing|Labour|Commerce|Family Affairs], in exercise of the powers conferred by section {sec} of the {act_parent}, makes the following [Order|Regulations|Rules].",
    "The [Minister|Secretary of State for Justice of Quellmar] makes this instrument after consulting the [Civil Justice Board|Housing Council|Tribunals Committee|Family Justice Panel].",
]
SI_FIRST = [
    "This instrument may be cited as the {si_title} and comes into force on {date}.",
    "Citation and commencement: the {si_title} come into force [on {date}|twenty-eight days after the day on which they are made].",
]
SI_INTERP = [
    "In this instrument, 'the Act' means the {act_parent}.",
    "In this instrument, '[relevant person|applicant|prescribed form|registrar]' has the meaning given in section {sec} of the Act.",
    "Words and expressions used in this instrument have the same meaning as in the Act.",
]
SI_RULES = {
    "tenancy": [
        "A notice to quit under section {sec} of the Act must be in the form set out in Schedule {sched} or a form substantially to the like effect.",
        "Where a security deposit is received, the landlord must within [fourteen|thirty] days give the tenant the prescribed information.",
        "The amount of a security deposit must not exceed [five|six|eight] weeks' rent.",
        "A landlord who levies distraint for rent must first serve a notice of arrears in the prescribed form.",
        "A rent review clause in a periodic tenancy has no effect unless the tenant is given [two|three] months' notice of the proposed rent.",
        "A holdover occupier remains liable for a sum equal to the rent for each day of occupation.",
    ],
    "employment": [
        "The fee payable on a claim of unfair dismissal presented to the Employment Tribunal is {amt_small}.",
        "An employer proposing redundancy of [ten|twenty] or more employees must begin consultation at least [thirty|forty-five] days before the first dismissal.",
        "The minimum period of notice pay for an employee with more than [two|five] years' continuous service is [four|six] weeks.",
        "Holiday pay must be calculated by reference to normal remuneration, including regular overtime.",
        "A worker on a zero-hours engagement is entitled to a written statement of terms within [one month|two months] of starting work.",
        "A protected disclosure made to a prescribed body is treated as made in good faith unless the contrary is shown.",
    ],
    "contract": [
        "The rate of interest payable on late commercial debts is [six|eight] per cent above the reference rate.",
        "A term excluding liability for breach of warranty in a consumer contract is of no effect.",
        "A limitation of liability clause in a standard-form contract must be drawn to the other party's attention before the contract is concluded.",
        "A retention of title clause is not enforceable against a purchaser in good faith unless registered.",
        "Compensation for late payment of an invoice is fixed at {amt_small} per invoice.",
    ],
    "family": [
        "An application for a contact order must be accompanied by a certificate of attendance at mediation.",
        "Child maintenance is to be calculated at [twelve|fifteen|twenty] per cent of the paying parent's net income for one child.",
        "A guardian ad litem appointed under section {sec} of the Act must file a report within [eight|twelve] weeks.",
        "A relocation application must give at least [sixty|ninety] days' notice to the other parent.",
        "In proceedings for ancillary relief, each party must file a statement of means in the prescribed form.",
        "Spousal support orders are to be reviewed at intervals of not more than [three|five] years.",
    ],
}
SI_COMMON = [
    "The fee payable on an application to the [Housing and Leases Tribunal|Employment Tribunal|Family Court|High Court] is {amt_small}.",
    "Regulation {n} of the {act_revoked} is revoked.",
    "Nothing in this instrument applies to [proceedings commenced before it comes into force|an agreement concluded before {date}].",
    "The registrar may extend any period prescribed by [this instrument|paragraph {sec}] where it is just to do so.",
    "An application must be accompanied by a copy of [the tenancy agreement|the contract of employment|the agreement in dispute|the relevant order].",
    "A relevant person who fails without reasonable excuse to comply with paragraph {sec} commits an offence.",
    "A document may be served by [post|electronic means|leaving it at the last known address].",
    "The forms in Schedule {sched} may be used with such variations as the circumstances require.",
]
SI_NOTES = [
    "Explanatory note (this note is not part of the instrument): this instrument [amends the prescribed forms|sets new fees|revokes obsolete provisions|clarifies the calculation of notice periods].",
    "EXPLANATORY NOTE: An impact assessment has not been prepared for this instrument as no significant impact on business is foreseen.",
    "",
]
SI_TITLES = [
    ("Dwelling Leases (Notice Forms) Order {year}", "tenancy"),
    ("Tenancy Deposits (Safekeeping) (Amendment) Regulations {year}", "tenancy"),
    ("Housing Standards (Distraint and Arrears) Order {year}", "tenancy"),
    ("Employment Tribunal (Fees and Procedure) Order {year}", "employment"),
    ("Workplace Relations (Notice Periods) Regulations {year}", "employment"),
    ("Working Time (Holiday Pay Calculation) Regulations {year}", "employment"),
    ("Household and Children Proceedings (Forms) Rules {year}", "family"),
    ("Child Support Assessment (Variation) Regulations {year}", "family"),
    ("Late Settlement of Commercial Debts (Rate of Interest) Order {year}", "contract"),
    ("Trade in Goods and Services (Standard Terms) Regulations {year}", "contract"),
    ("Courts and Registries (Fees) Order {year}", "general"),
]

LETTER_OPEN = [
    "Dear [Sirs|Colleagues|Madam],",
    "Dear {addressee},",
    "Dear {addressee}\n\nRe: {matter}",
    "Our ref: {ref}  Your ref: {ref}\n\nDear {addressee},",
    "WITHOUT PREJUDICE SAVE AS TO COSTS\n\nDear {addressee},",
]
LETTER_BODY = [
    "We act for {client_name} in connection with {matter}.",
    "We write further to your letter of {date}[, the contents of which are noted|, for which thank you|].",
    "Our client [denies|does not accept|strongly disputes] the allegations set out in your letter.",
    "Please confirm within {n} days whether your client [will agree to mediation|accepts the proposed timetable|intends to defend the claim].",
    "If we do not hear from you by {date}, we are instructed to issue proceedings without further notice.",
    "We enclose [a copy of the {doc_thing}|our client's schedule of loss|the signed consent order|a draft order for your approval].",
    "For the avoidance of doubt, [our client|{client_name}] reserves all of its rights[, including as to costs|].",
    "We note that you have not yet provided [the documents requested in our letter of {date}|your client's disclosure|a substantive response].",
    "Our client is prepared to settle this matter on payment of {amt} in full and final settlement.",
    "We would ask that all further correspondence be directed to [the writer|{author}|our {town} office].",
    "Your client's proposal [of {date}|dated {date}|] is not acceptable, for the reasons set out [below|in the enclosed schedule].",
    "We refer to the hearing listed for {date} before {judge}.",
    "Thank you for your call [this morning|yesterday|earlier today|on {date}]; I confirm [what was discussed|the points we agreed|our client's position as follows].",
    "It would be sensible for the parties to agree a timetable for [expert evidence|disclosure|witness statements] without troubling [the court|{judge}].",
    "We are instructed that our client has already paid {amt_small} on account, and we enclose proof of payment.",
    "I am sorry it has taken a little while to come back to you - the client has been [away|unwell|difficult to reach].",
    "In the circumstances we invite your client to withdraw the [claim|application|counterclaim] [by {date}|within {n} days|forthwith], failing which we will seek our costs[ on the indemnity basis|].",
    "We have today filed the [acknowledgment of service|defence|application notice] with the court.",
]
LETTER_CLOSE = [
    "Yours faithfully,\n{firm}",
    "Yours sincerely,\n{author}\n{firm}",
    "Kind regards,\n{author}",
    "Yours faithfully\n\n{firm}\n{addr}",
    "With best wishes,\n{author_first}",
]

DOC_THINGS = ["tenancy agreement", "inventory report", "dismissal letter",
              "contract of employment", "purchase order", "delivery note",
              "signed variation", "parenting plan", "mediation summary",
              "guardian's report", "bank statements", "inspection report",
              "minutes of the disciplinary hearing", "invoice", "consent order"]
DEPTS = ["logistics", "finance", "customer service", "dispatch", "quality",
         "catering", "IT", "maintenance"]
REPAIR_ITEMS = ["boiler", "roof", "kitchen ceiling", "bathroom extractor",
                "rear windows", "communal stairwell", "front-door lock"]


# ---------------------------------------------------------------------------
