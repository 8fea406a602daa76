"""Every coded concept Kerma Ledger writes or reads, declared once.

Codes come from DICOM PS3.16 (templates TID 10001-10013, TID 1002/1004 and the context
groups they cite). Each triplet here is checked against pydicom's PS3.16-derived concept
dictionary in ``tests/test_concepts.py``. Code equality (pydicom ``Code``) compares scheme
and value only, never the meaning, so legacy meanings still match.
"""

from __future__ import annotations

from pydicom.sr.coding import Code

__all__ = [name for name in dir() if name.isupper()]  # refreshed at the end of the module


def _dcm(value: str, meaning: str) -> Code:
    return Code(value, "DCM", meaning)


def _sct(value: str, meaning: str) -> Code:
    return Code(value, "SCT", meaning)


def _ucum(value: str, meaning: str | None = None) -> Code:
    return Code(value, "UCUM", meaning or value)


# --- document root and header concepts (TID 10001 / TID 10011) ---------------------------
XRAY_RADIATION_DOSE_REPORT = _dcm("113701", "X-Ray Radiation Dose Report")
PROCEDURE_REPORTED = _dcm("121058", "Procedure reported")
HAS_INTENT = _sct("363703001", "Has intent")
DIAGNOSTIC_INTENT = _sct("261004008", "Diagnostic Intent")
THERAPEUTIC_INTENT = _sct("262202000", "Therapeutic Intent")
PROJECTION_XRAY = _dcm("113704", "Projection X-Ray")
MAMMOGRAPHY = _sct("71651007", "Mammography")
COMPUTED_TOMOGRAPHY_XRAY = _sct("77477000", "Computed tomography")
ACQUISITION_DEVICE_TYPE = _dcm("122142", "Acquisition Device Type")
INTEGRATED_PROJECTION_SYSTEM = _dcm("113958", "Integrated Projection Radiography System")
FLUORO_GUIDED_PROJECTION_SYSTEM = _dcm("113957", "Fluoroscopy-Guided Projection Radiography System")
CASSETTE_BASED_PROJECTION_SYSTEM = _dcm("113959", "Cassette-based Projection Radiography System")
SCOPE_OF_ACCUMULATION = _dcm("113705", "Scope of Accumulation")
SCOPE_STUDY = _dcm("113014", "Study")
STUDY_INSTANCE_UID = _dcm("110180", "Study Instance UID")
START_OF_XRAY_IRRADIATION = _dcm("113809", "Start of X-Ray Irradiation")
END_OF_XRAY_IRRADIATION = _dcm("113810", "End of X-Ray Irradiation")
SOURCE_OF_DOSE_INFORMATION = _dcm("113854", "Source of Dose Information")
AUTOMATED_DATA_COLLECTION = _dcm("113856", "Automated Data Collection")
XRAY_DETECTOR_DATA_AVAILABLE = _dcm("113945", "X-Ray Detector Data Available")
XRAY_SOURCE_DATA_AVAILABLE = _dcm("113943", "X-Ray Source Data Available")
XRAY_MECHANICAL_DATA_AVAILABLE = _dcm("113944", "X-Ray Mechanical Data Available")
YES = _sct("373066001", "Yes")
NO = _sct("373067005", "No")
COMMENT = _dcm("121106", "Comment")
FINDING = _dcm("121071", "Finding")
IMAGE_VIEW = _dcm("111031", "Image View")

# --- observer context (TID 1002 / TID 1004) -----------------------------------------------
OBSERVER_TYPE = _dcm("121005", "Observer Type")
DEVICE = _dcm("121007", "Device")
DEVICE_OBSERVER_UID = _dcm("121012", "Device Observer UID")
DEVICE_OBSERVER_NAME = _dcm("121013", "Device Observer Name")
DEVICE_OBSERVER_MANUFACTURER = _dcm("121014", "Device Observer Manufacturer")
DEVICE_OBSERVER_MODEL_NAME = _dcm("121015", "Device Observer Model Name")
DEVICE_OBSERVER_SERIAL_NUMBER = _dcm("121016", "Device Observer Serial Number")
DEVICE_OBSERVER_PHYSICAL_LOCATION = _dcm(
    "121017", "Device Observer Physical Location During Observation"
)
DEVICE_ROLE_IN_PROCEDURE = _dcm("113876", "Device Role in Procedure")
IRRADIATING_DEVICE = _dcm("113859", "Irradiating Device")

# --- CT (TID 10012 / TID 10013) -----------------------------------------------------------
CT_ACCUMULATED_DOSE_DATA = _dcm("113811", "CT Accumulated Dose Data")
TOTAL_NUMBER_OF_IRRADIATION_EVENTS = _dcm("113812", "Total Number of Irradiation Events")
CT_DLP_TOTAL = _dcm("113813", "CT Dose Length Product Total")
CT_ACQUISITION = _dcm("113819", "CT Acquisition")
ACQUISITION_PROTOCOL = _dcm("125203", "Acquisition Protocol")
TARGET_REGION = _dcm("123014", "Target Region")
CT_ACQUISITION_TYPE = _dcm("113820", "CT Acquisition Type")
SPIRAL_ACQUISITION = _sct("116152004", "Spiral Acquisition")
SEQUENCED_ACQUISITION = _dcm("113804", "Sequenced Acquisition")
CONSTANT_ANGLE_ACQUISITION = _dcm("113805", "Constant Angle Acquisition")
STATIONARY_ACQUISITION_CT = _dcm("113806", "Stationary Acquisition")
IRRADIATION_EVENT_UID = _dcm("113769", "Irradiation Event UID")
DATETIME_STARTED = _dcm("111526", "DateTime Started")
CT_ACQUISITION_PARAMETERS = _dcm("113822", "CT Acquisition Parameters")
EXPOSURE_TIME = _dcm("113824", "Exposure Time")
SCANNING_LENGTH = _dcm("113825", "Scanning Length")
TOP_Z_SCANNING_LENGTH = _dcm("113897", "Top Z Location of Scanning Length")        # TID 10014
BOTTOM_Z_SCANNING_LENGTH = _dcm("113898", "Bottom Z Location of Scanning Length")  # TID 10014
NOMINAL_SINGLE_COLLIMATION_WIDTH = _dcm("113826", "Nominal Single Collimation Width")
NOMINAL_TOTAL_COLLIMATION_WIDTH = _dcm("113827", "Nominal Total Collimation Width")
PITCH_FACTOR = _dcm("113828", "Pitch Factor")
NUMBER_OF_XRAY_SOURCES = _dcm("113823", "Number of X-Ray Sources")
CT_XRAY_SOURCE_PARAMETERS = _dcm("113831", "CT X-Ray Source Parameters")
IDENTIFICATION_OF_XRAY_SOURCE = _dcm("113832", "Identification of the X-Ray Source")
KVP = _dcm("113733", "KVP")
MAXIMUM_XRAY_TUBE_CURRENT = _dcm("113833", "Maximum X-Ray Tube Current")
XRAY_TUBE_CURRENT = _dcm("113734", "X-Ray Tube Current")
EXPOSURE_TIME_PER_ROTATION = _dcm("113834", "Exposure Time per Rotation")
CT_DOSE = _dcm("113829", "CT Dose")
MEAN_CTDIVOL = _dcm("113830", "Mean CTDIvol")
CTDIW_PHANTOM_TYPE = _dcm("113835", "CTDIw Phantom Type")
IEC_HEAD_DOSIMETRY_PHANTOM = _dcm("113690", "IEC Head Dosimetry Phantom")
IEC_BODY_DOSIMETRY_PHANTOM = _dcm("113691", "IEC Body Dosimetry Phantom")
DLP = _dcm("113838", "DLP")
SIZE_SPECIFIC_DOSE_ESTIMATE = _dcm("113930", "Size Specific Dose Estimate")
WATER_EQUIVALENT_DIAMETER = _dcm("113980", "Water Equivalent Diameter")
DOSE_CHECK_ALERT_DETAILS = _dcm("113900", "Dose Check Alert Details")
DOSE_CHECK_NOTIFICATION_DETAILS = _dcm("113908", "Dose Check Notification Details")
DLP_ALERT_VALUE = _dcm("113903", "DLP Alert Value")
CTDIVOL_ALERT_VALUE = _dcm("113904", "CTDIvol Alert Value")
DLP_NOTIFICATION_VALUE = _dcm("113911", "DLP Notification Value")
CTDIVOL_NOTIFICATION_VALUE = _dcm("113912", "CTDIvol Notification Value")

# --- projection X-ray (TID 10002-10007, TID 10003A/B/C) ----------------------------------
ACCUMULATED_XRAY_DOSE_DATA = _dcm("113702", "Accumulated X-Ray Dose Data")
ACQUISITION_PLANE = _dcm("113764", "Acquisition Plane")
CALIBRATION = _dcm("122505", "Calibration")
CALIBRATION_FACTOR = _dcm("122322", "Calibration Factor")
CALIBRATION_UNCERTAINTY = _dcm("113763", "Calibration Uncertainty")
CALIBRATION_DATETIME = _dcm("113723", "Calibration DateTime")
SINGLE_PLANE = _dcm("113622", "Single Plane")
PLANE_A = _dcm("113620", "Plane A")
PLANE_B = _dcm("113621", "Plane B")
DOSE_AREA_PRODUCT_TOTAL = _dcm("113722", "Dose Area Product Total")
DOSE_RP_TOTAL = _dcm("113725", "Dose (RP) Total")
FLUORO_DOSE_AREA_PRODUCT_TOTAL = _dcm("113726", "Fluoro Dose Area Product Total")
FLUORO_DOSE_RP_TOTAL = _dcm("113728", "Fluoro Dose (RP) Total")
TOTAL_FLUORO_TIME = _dcm("113730", "Total Fluoro Time")
ACQUISITION_DOSE_AREA_PRODUCT_TOTAL = _dcm("113727", "Acquisition Dose Area Product Total")
ACQUISITION_DOSE_RP_TOTAL = _dcm("113729", "Acquisition Dose (RP) Total")
TOTAL_ACQUISITION_TIME = _dcm("113855", "Total Acquisition Time")
TOTAL_NUMBER_OF_RADIOGRAPHIC_FRAMES = _dcm("113731", "Total Number of Radiographic Frames")
ACCUMULATED_AVERAGE_GLANDULAR_DOSE = _dcm("111637", "Accumulated Average Glandular Dose (mammo)")
LATERALITY = _sct("272741003", "Laterality")
LEFT = _sct("7771000", "Left")
RIGHT = _sct("24028007", "Right")
REFERENCE_POINT_DEFINITION = _dcm("113780", "Reference Point Definition")
RP_15CM_FROM_ISOCENTER = _dcm("113860", "15cm from Isocenter toward Source")
RP_1CM_ABOVE_TABLETOP = _dcm("113862", "1cm above Tabletop")
RP_4_2CM_ABOVE_BREAST_SUPPORT = _dcm("113865", "4.2cm above Breast Support Surface")
RP_AT_SURFACE_OF_PATIENT = _dcm("113964", "At Surface of Patient")
IRRADIATION_EVENT_XRAY_DATA = _dcm("113706", "Irradiation Event X-Ray Data")
IRRADIATION_EVENT_TYPE = _dcm("113721", "Irradiation Event Type")
FLUOROSCOPY = _sct("44491008", "Fluoroscopy")
STATIONARY_ACQUISITION = _dcm("113611", "Stationary Acquisition")
STEPPING_ACQUISITION = _dcm("113612", "Stepping Acquisition")
ROTATIONAL_ACQUISITION = _dcm("113613", "Rotational Acquisition")
ANATOMICAL_STRUCTURE = _sct("91723000", "Anatomical Structure")
DOSE_AREA_PRODUCT = _dcm("122130", "Dose Area Product")
ENTRANCE_EXPOSURE_AT_RP = _dcm("111636", "Entrance Exposure at RP")
DOSE_RP = _dcm("113738", "Dose (RP)")
AVERAGE_GLANDULAR_DOSE = _dcm("111631", "Average Glandular Dose")
HALF_VALUE_LAYER = _dcm("111634", "Half Value Layer")
ANODE_TARGET_MATERIAL = _dcm("111632", "Anode Target Material")
FLUORO_MODE = _dcm("113732", "Fluoro Mode")
PULSED = _dcm("113631", "Pulsed")
CONTINUOUS = _dcm("113630", "Continuous")
PULSE_RATE = _dcm("113791", "Pulse Rate")
NUMBER_OF_PULSES = _dcm("113768", "Number of Pulses")
PULSE_WIDTH = _dcm("113793", "Pulse Width")
IRRADIATION_DURATION = _dcm("113742", "Irradiation Duration")
EXPOSURE = _dcm("113736", "Exposure")
XRAY_FILTERS = _dcm("113771", "X-Ray Filters")
XRAY_FILTER_TYPE = _dcm("113772", "X-Ray Filter Type")
FLAT_FILTER = _dcm("113653", "Flat filter")
XRAY_FILTER_MATERIAL = _dcm("113757", "X-Ray Filter Material")
XRAY_FILTER_THICKNESS_MINIMUM = _dcm("113758", "X-Ray Filter Thickness Minimum")
XRAY_FILTER_THICKNESS_MAXIMUM = _dcm("113773", "X-Ray Filter Thickness Maximum")
COLLIMATED_FIELD_AREA = _dcm("113790", "Collimated Field Area")
POSITIONER_PRIMARY_ANGLE = _dcm("112011", "Positioner Primary Angle")
POSITIONER_SECONDARY_ANGLE = _dcm("112012", "Positioner Secondary Angle")
DISTANCE_SOURCE_TO_DETECTOR = _dcm("113750", "Distance Source to Detector")
DISTANCE_SOURCE_TO_ISOCENTER = _dcm("113748", "Distance Source to Isocenter")
DISTANCE_SOURCE_TO_REFERENCE_POINT = _dcm("113737", "Distance Source to Reference Point")
DISTANCE_SOURCE_TO_TABLE_PLANE = _dcm("113792", "Distance Source to Table Plane")
TABLE_LONGITUDINAL_POSITION = _dcm("113751", "Table Longitudinal Position")   # TID 10003C
TABLE_LATERAL_POSITION = _dcm("113752", "Table Lateral Position")
TABLE_HEIGHT_POSITION = _dcm("113753", "Table Height Position")
COLLIMATED_FIELD_HEIGHT = _dcm("113788", "Collimated Field Height")           # TID 10003B
COLLIMATED_FIELD_WIDTH = _dcm("113789", "Collimated Field Width")
COMPRESSION_THICKNESS = _dcm("111633", "Compression Thickness")
EXPOSURE_INDEX = _dcm("113845", "Exposure Index")
TARGET_EXPOSURE_INDEX = _dcm("113846", "Target Exposure Index")
DEVIATION_INDEX = _dcm("113847", "Deviation Index")

# --- patient position per irradiation event (TID 10003; CID 19, CID 20, CID 21) ----------
PATIENT_TABLE_RELATIONSHIP = _dcm("113745", "Patient Table Relationship")
PATIENT_ORIENTATION = _dcm("113743", "Patient Orientation")
PATIENT_ORIENTATION_MODIFIER = _dcm("113744", "Patient Orientation Modifier")
RECUMBENT = _sct("102538003", "recumbent")                      # CID 19
SEMI_ERECT = _sct("102539006", "semi-erect")
SUPINE = _sct("40199007", "supine")                             # CID 20
PRONE = _sct("1240000", "prone")
LEFT_LATERAL_DECUBITUS = _sct("102536004", "left lateral decubitus")
RIGHT_LATERAL_DECUBITUS = _sct("102535000", "right lateral decubitus")
HEADFIRST = _sct("102540008", "headfirst")                      # CID 21
FEET_FIRST = _sct("102541007", "feet-first")

# --- materials (CID 10006 / CID 10016) and anatomy (CID 4030 / CID 4031) ------------------
ALUMINUM = _sct("12503006", "Aluminum")
COPPER = _sct("66925006", "Copper")
RHODIUM = _sct("59801003", "Rhodium")
MOLYBDENUM = _sct("71128006", "Molybdenum")
TUNGSTEN = _sct("26194003", "Tungsten")
SILVER = _sct("41967008", "Silver")

# --- UCUM units as the templates prescribe them ------------------------------------------
UNIT_GY_M2 = _ucum("Gy.m2")
UNIT_GY = _ucum("Gy")
UNIT_MGY = _ucum("mGy")
UNIT_MGY_CM = _ucum("mGy.cm")
UNIT_S = _ucum("s")
UNIT_MS = _ucum("ms")
UNIT_MM = _ucum("mm")
UNIT_CM = _ucum("cm")
UNIT_M2 = _ucum("m2")
UNIT_KV = _ucum("kV")
UNIT_MA = _ucum("mA")
UNIT_UAS = _ucum("uA.s")
UNIT_DEG = _ucum("deg")
UNIT_RATIO = _ucum("{ratio}", "ratio")
UNIT_EVENTS = _ucum("{events}", "events")
UNIT_XRAY_SOURCES = _ucum("{X-Ray sources}", "X-Ray sources")
UNIT_PULSE_PER_S = _ucum("{pulse}/s", "pulse/s")
UNIT_NONE = _ucum("1", "no units")

__all__ = sorted(name for name in globals() if name.isupper())
